"""The science core never imports the interface (DESIGN.md house style): checked in a fresh interpreter."""

from __future__ import annotations

import subprocess
import sys

CORE = ["sleepfuse.readers", "sleepfuse.scoring", "sleepfuse.fusion", "sleepfuse.run.batch", "sleepfuse.run.participant",
        "sleepfuse.fusion.disagreement", "sleepfuse.run.session", "sleepfuse.study.review", "sleepfuse.cli.open_command"]


def test_core_modules_import_without_textual():
    code = "import importlib, sys\n" + "".join(f"importlib.import_module({m!r})\n" for m in CORE) + \
        "print(sorted(m for m in sys.modules if m == 'textual' or m.startswith('textual.')))\n"
    r = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=120)
    assert r.returncode == 0, r.stderr
    assert r.stdout.strip() == "[]"
