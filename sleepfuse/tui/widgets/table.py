"""A data table whose Enter belongs to the screen, so keys typed ahead act in order.

Textual's DataTable answers Enter by posting a ``CellSelected`` message, which
reaches the screen only after any keys typed behind Enter have already moved
the cursor (or quit the app). Here Enter is left to the screen's own binding,
which runs at once on the cursor the previous key left. A mouse click still
selects through the message, which carries its own coordinate.
"""

from __future__ import annotations

from textual.widgets import DataTable


class CursorTable(DataTable, inherit_bindings=False):
    """DataTable without its Enter binding (the screen binds Enter to open what is under the cursor)."""

    BINDINGS = [b for b in DataTable.BINDINGS if getattr(b, "key", "") != "enter"]
