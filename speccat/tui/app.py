"""The Textual application behind ``speccat browse`` and ``speccat demo``.

``make_app(archive)`` is the one factory used by the CLI, the demo and the tests. The app only
wires: the screens compose the widgets, the workers run the queries, and one handler
(``speccat.tui.notices``) turns any failed worker into a visible notice.
"""

from __future__ import annotations

from typing import Any, ClassVar

from textual.app import App
from textual.binding import Binding, BindingType

from speccat.tui.browse_screen import BrowseScreen
from speccat.tui.detail_screen import DetailScreen
from speccat.tui.widgets.filters import FILTER_KEYS
from speccat.tui.widgets.modals import KeyHelp
from speccat.tui.widgets.table import DetectionTable


class SpeccatBrowser(App[None]):
    """Browse, filter, inspect and export the detections of one archive."""

    CSS_PATH = "speccat.tcss"
    TITLE = "speccat browse"
    ENABLE_COMMAND_PALETTE = False

    BINDINGS: ClassVar[list[BindingType]] = [
        Binding(
            "question_mark,f1",
            "keys",
            "Keys",
            id="app.keys",
            tooltip="list every key (this screen)",
        ),
        Binding("q", "quit", "Quit", id="app.quit", tooltip="leave speccat browse"),
    ]

    def __init__(self, archive: Any) -> None:
        super().__init__()
        self.archive = archive

    def on_mount(self) -> None:
        self.push_screen(BrowseScreen(self.archive))

    def action_keys(self) -> None:
        if isinstance(self.screen, KeyHelp):
            return
        self.push_screen(KeyHelp(help_sections()))


def help_sections() -> list[tuple[str, list[BindingType]]]:
    """The binding lists shown by the help screen, by where they apply."""
    return [
        ("Anywhere", list(SpeccatBrowser.BINDINGS)),
        ("Detection list", list(BrowseScreen.BINDINGS)),
        ("Table (when it has the focus)", list(DetectionTable.BINDINGS)),
        ("Filter form", list(FILTER_KEYS)),
        ("Inspector (detail view)", list(DetailScreen.BINDINGS)),
    ]


def make_app(archive: Any) -> SpeccatBrowser:
    """The browser over an open ``speccat.archive.Archive`` (opened read-only by the CLI)."""
    return SpeccatBrowser(archive)
