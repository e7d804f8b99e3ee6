"""The sleepfuse terminal app: wires the screens together, nothing else.

``create_app`` is the one factory for the CLI and the tests; pass
``preloaded`` (a StudyResult or Workspace) to skip scoring, e.g. in tests.
"""

from __future__ import annotations

from pathlib import Path

from textual.app import App
from textual.binding import Binding

from sleepfuse.run.engine import StudyResult
from sleepfuse.run.session import PairChoice, Workspace
from .keys import KeysInOrder
from .legible import use_legible_monochrome
from .screens.agreement import AgreementScreen
from .screens.disagreements import DisagreementScreen
from .screens.explore import ExploreScreen
from .screens.export import ExportScreen
from .screens.help import HelpScreen
from .screens.night import NightScreen
from .screens.overview import OverviewScreen
from .screens.review import ReviewDialog


TABLE_KEYS = [("PgUp PgDn", "a page up or down"), ("Home End", "first or last column"),
              ("Ctrl+Home/End", "first or last row")]


class SleepfuseApp(KeysInOrder, App):
    """Overview first; night, disagreements, agreement, clusters, export and help are pushed on top."""

    TITLE = "sleepfuse"
    ENABLE_COMMAND_PALETTE = False
    BINDINGS = [Binding("question_mark", "help", "Help", key_display="?")]
    # messages: compact, one at a time, kept clear of the footer and the overview's legend line
    CSS = """
    ToastRack { margin-bottom: 2; }
    Toast { max-width: 44; padding: 0 1; }
    """

    def __init__(self, study: Path, *, workspace: Workspace | None = None, study_name: str = "",
                 export_dir: Path | None = None, reviewer: str | None = None) -> None:
        super().__init__()
        self._filters = use_legible_monochrome(self._filters)  # NO_COLOR: every mark keeps its contrast
        self.study = Path(study)
        self.workspace = workspace
        self.study_name = study_name or (workspace.name if workspace else self.study.name)
        self.export_dir = Path(export_dir) if export_dir else self.study.resolve().parent / f"{self.study.name}-sleepfuse-out"
        self.export_dir_given = export_dir is not None  # --export-dir wins over the folder remembered
        self.choice = PairChoice()
        self.reviewer = reviewer  # recorded with each review decision (None: the system user)
        self.outcomes_path: Path | None = None  # clusters screen: None = participants.csv in the study folder

    def on_mount(self) -> None:
        self.push_screen(self.first_screen())

    def first_screen(self):
        return OverviewScreen()

    def notify(self, message: str, *, title: str = "", severity: str = "information",
               timeout: float | None = None, markup: bool = False) -> None:
        """One message at a time: a new one replaces the last, so they never pile up over the screen.

        Information goes after 4 s, errors stay 12 s; text is shown as written (no markup).
        """
        if timeout is None:
            timeout = 12.0 if severity == "error" else 4.0
        super().notify(message, title=title, severity=severity, timeout=timeout, markup=markup)

    def _on_notify(self, event) -> None:
        """A message arriving replaces the one on screen (messages are posted, so this is where they land)."""
        self._notifications.clear()
        super()._on_notify(event)

    def _loaded(self) -> bool:
        if self.workspace is None:
            self.notify("the study is still loading", severity="warning")
            return False
        return True

    def open_night(self, participant: str, night: str) -> None:
        if self._loaded():
            self.push_screen(NightScreen(participant, night))

    def action_disagreements(self) -> None:
        if self._loaded():
            self.push_screen(DisagreementScreen())

    def action_agreement(self) -> None:
        if self._loaded():
            self.push_screen(AgreementScreen())

    def action_clusters(self) -> None:
        if self._loaded():
            self.push_screen(ExploreScreen())

    def action_export(self) -> None:
        self.push_screen(ExportScreen(self.study, self.export_dir, explicit=self.export_dir_given))

    def action_help(self) -> None:
        if not isinstance(self.screen, HelpScreen):
            self.push_screen(HelpScreen())

    def help_sections(self) -> list:
        """(screen title, bindings, extra keys) for the help screen."""
        return [
            ("Everywhere", list(self.BINDINGS) + [Binding("ctrl+q", "quit", "Quit at once")], []),
            ("Study overview", OverviewScreen.BINDINGS, OverviewScreen.HELP_KEYS + TABLE_KEYS),
            ("Night view", NightScreen.BINDINGS, [("↑ ↓", "scroll the parameter table")] + TABLE_KEYS),
            ("Disagreements", DisagreementScreen.BINDINGS, [("↑ ↓", "move in the ranking")] + TABLE_KEYS),
            ("Agreement", AgreementScreen.BINDINGS, []),
            ("Clusters (c)", ExploreScreen.BINDINGS, ExploreScreen.HELP_KEYS),
            ("Review dialog (x, i)", ReviewDialog.BINDINGS,
             [("Enter", "save the decision")]),
            ("Export (e)", ExportScreen.BINDINGS, ExportScreen.HELP_KEYS),
            ("Help", HelpScreen.BINDINGS, []),
        ]


def create_app(study: str | Path, *, preloaded: StudyResult | Workspace | None = None,
               export_dir: str | Path | None = None, reviewer: str | None = None) -> SleepfuseApp:
    """The app for one study folder; scoring happens in a worker unless ``preloaded`` is given."""
    study = Path(study)
    workspace = Workspace.from_result(study, preloaded) if isinstance(preloaded, StudyResult) else preloaded
    name = ""
    if workspace is None:
        from sleepfuse.model.config import load_config
        from sleepfuse.model.errors import ConfigError

        try:
            name = load_config(study).study.name
        except (ConfigError, OSError):
            name = study.name  # the loading worker reports the error on screen
    return SleepfuseApp(study, workspace=workspace, study_name=name, export_dir=Path(export_dir) if export_dir else None,
                        reviewer=reviewer)


class MatrixWorkspace:
    """A participant × feature matrix read from a CSV, standing in for a scored study on the clusters screen."""

    def __init__(self, path: Path) -> None:
        from sleepfuse.explore.cli import read_matrix

        self.name = path.name
        self.version = 0
        self._matrix = read_matrix(path)

    def matrix(self):
        return self._matrix


class ClustersApp(SleepfuseApp):
    """The app opened on a matrix CSV: the clusters screen alone (q leaves the app)."""

    def first_screen(self):
        return ExploreScreen()

    def help_sections(self) -> list:
        return [("Everywhere", list(self.BINDINGS) + [Binding("ctrl+q", "quit", "Quit at once")], []),
                ("Clusters", ExploreScreen.BINDINGS, ExploreScreen.HELP_KEYS),
                ("Help", HelpScreen.BINDINGS, [])]


def create_clusters_app(matrix: str | Path, *, outcomes: str | Path | None = None) -> ClustersApp:
    """The app on a participant × feature matrix (e.g. the clustering cohort); outcomes default to
    participants.csv beside the matrix. Raises ConfigError when the matrix cannot be read."""
    matrix = Path(matrix)
    app = ClustersApp(matrix.parent, workspace=MatrixWorkspace(matrix), study_name=f"{matrix.name} (matrix)")
    app.outcomes_path = Path(outcomes) if outcomes else matrix.parent / "participants.csv"
    return app
