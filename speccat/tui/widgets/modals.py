"""Modal screens: the export file prompt, the overwrite question and the generated key help."""

from __future__ import annotations

from collections.abc import Iterable, Sequence
from pathlib import Path
from typing import ClassVar

from textual import on
from textual.app import ComposeResult
from textual.binding import Binding, BindingType
from textual.containers import Horizontal, Vertical, VerticalScroll
from textual.content import Content
from textual.markup import escape
from textual.screen import ModalScreen
from textual.widgets import Button, Input, Label, OptionList, Static

EXPORT_SUFFIXES = (".csv", ".ecsv", ".vot", ".xml", ".json")


class ExportPrompt(ModalScreen[Path | None]):
    """Ask for the file to export to; returns its path, or None when cancelled."""

    BINDINGS: ClassVar[list[BindingType]] = [
        Binding("escape", "cancel", "Cancel export", id="export.cancel"),
    ]

    def __init__(self, what: str, default_name: str, cwd: Path | None = None) -> None:
        super().__init__()
        self.what = what
        self.default_name = default_name
        self.cwd = cwd or Path.cwd()

    def compose(self) -> ComposeResult:
        with Vertical(classes="dialog"):
            yield Label(f"Export {self.what}", classes="dialog-title")
            yield Label(
                "File name: .csv or .ecsv (also .vot, .json); relative to " + _short(self.cwd),
                classes="dialog-hint",
            )
            yield Input(value=self.default_name, id="export-path")
            yield Label("", id="export-problem", classes="dialog-problem")
            with Horizontal(classes="dialog-buttons"):
                yield Button("Write file", variant="primary", id="export-ok")
                yield Button("Cancel", id="export-cancel")

    @on(Input.Submitted)
    @on(Button.Pressed, "#export-ok")
    def _accept(self) -> None:
        text = self.query_one("#export-path", Input).value.strip()
        problem = check_export_path(text)
        if problem:
            self.query_one("#export-problem", Label).update(problem)
            return
        path = Path(text).expanduser()
        self.dismiss(path if path.is_absolute() else self.cwd / path)

    @on(Button.Pressed, "#export-cancel")
    def action_cancel(self) -> None:
        self.dismiss(None)


def check_export_path(text: str) -> str:
    """Why ``text`` cannot be an export file name ('' when it can)."""
    if not text:
        return "✗ type a file name"
    path = Path(text).expanduser()
    if path.suffix.lower() not in EXPORT_SUFFIXES:
        return "✗ end the name in .csv, .ecsv, .vot or .json (the suffix picks the format)"
    if path.is_dir():
        return "✗ that is a folder"
    if not path.parent.is_dir() and path.parent != Path(""):
        return f"✗ folder {path.parent} does not exist"
    return ""


class ValuePicker(ModalScreen[str | None]):
    """Choose one of the archive's values for a filter field; type to narrow the list."""

    BINDINGS: ClassVar[list[BindingType]] = [
        Binding("escape", "cancel", "Close the list", id="picker.cancel"),
        Binding("down", "to_list", "Go to the list", show=False, id="picker.to_list"),
    ]

    def __init__(self, field: str, values: Sequence[str]) -> None:
        super().__init__()
        self.field = field
        self.values = list(values)

    def compose(self) -> ComposeResult:
        with Vertical(classes="dialog picker-dialog"):
            yield Label(
                f"Pick a {self.field} ({len(self.values):,} in the archive)", classes="dialog-title"
            )
            yield Input(placeholder="type to narrow the list", id="picker-narrow")
            yield OptionList(*self.values[:MAX_PICK], id="picker-list")
            yield Label("enter picks · esc closes", classes="dialog-hint")

    @on(Input.Changed, "#picker-narrow")
    def _narrow(self, event: Input.Changed) -> None:
        needle = event.value.strip().lower()
        shown = [v for v in self.values if needle in v.lower()][:MAX_PICK]
        options = self.query_one("#picker-list", OptionList)
        options.clear_options()
        options.add_options(shown)
        if shown:
            options.highlighted = 0

    @on(Input.Submitted, "#picker-narrow")
    def _take_first(self) -> None:
        options = self.query_one("#picker-list", OptionList)
        if options.option_count:
            self.dismiss(str(options.get_option_at_index(options.highlighted or 0).prompt))

    @on(OptionList.OptionSelected)
    def _picked(self, event: OptionList.OptionSelected) -> None:
        self.dismiss(str(event.option.prompt))

    def action_to_list(self) -> None:
        self.query_one("#picker-list", OptionList).focus()

    def action_cancel(self) -> None:
        self.dismiss(None)


MAX_PICK = 2000  # longest list offered; narrowing by typing reaches the rest


class ConfirmOverwrite(ModalScreen[bool]):
    """The file exists: replace it (True) or go back (False)."""

    BINDINGS: ClassVar[list[BindingType]] = [
        Binding("y", "answer(True)", "Replace the file", id="overwrite.yes"),
        Binding("n,escape", "answer(False)", "Keep the file", id="overwrite.no"),
    ]

    def __init__(self, path: Path) -> None:
        super().__init__()
        self.path = path

    def compose(self) -> ComposeResult:
        with Vertical(classes="dialog"):
            yield Label("File exists", classes="dialog-title")
            yield Label(f"{self.path} already exists. Replace it?", classes="dialog-hint")
            with Horizontal(classes="dialog-buttons"):
                yield Button("Replace (y)", variant="warning", id="overwrite-yes")
                yield Button("Keep it (n)", id="overwrite-no")

    @on(Button.Pressed)
    def _pressed(self, event: Button.Pressed) -> None:
        self.dismiss(event.button.id == "overwrite-yes")

    def action_answer(self, yes: bool) -> None:
        self.dismiss(yes)


class KeyHelp(ModalScreen[None]):
    """Every key binding of the browser, generated from the binding lists, by section."""

    BINDINGS: ClassVar[list[BindingType]] = [
        Binding("escape,question_mark,q", "close", "Close help", id="help.close"),
    ]

    def __init__(self, sections: Sequence[tuple[str, Iterable[BindingType]]]) -> None:
        super().__init__()
        self.sections = sections

    def compose(self) -> ComposeResult:
        with Vertical(classes="dialog help-dialog"):
            yield Label("Keys  (esc closes; the mouse works too)", classes="dialog-title")
            with VerticalScroll():
                yield Static(help_table(self.sections), id="help-keys")

    def action_close(self) -> None:
        self.dismiss(None)


def help_table(sections: Sequence[tuple[str, Iterable[BindingType]]]) -> Content:
    """Every described binding as aligned (keys, what it does) lines, grouped by section."""
    blocks: list[tuple[str, list[tuple[str, str]]]] = []
    for title, bindings in sections:
        rows = [
            (
                ", ".join(_key_name(k) for k in b.key.split(",")),
                f"{b.description}: {b.tooltip}" if b.tooltip else b.description,
            )
            for b in bindings
            if isinstance(b, Binding) and b.description
        ]
        if rows:
            blocks.append((title, rows))
    width = max((len(k) for _, rows in blocks for k, _ in rows), default=0)
    lines: list[str] = []
    for title, rows in blocks:
        lines.append(f"[b u]{escape(title)}[/]")
        lines += [f"  [b]{escape(k.ljust(width))}[/]  {escape(d)}" for k, d in rows]
        lines.append("")
    return Content.from_markup("\n".join(lines).rstrip())


_KEY_NAMES = {
    "question_mark": "?",
    "slash": "/",
    "space": "space",
    "escape": "esc",
    "enter": "enter",
    "pageup": "PgUp",
    "pagedown": "PgDn",
    "less_than_sign": "<",
    "greater_than_sign": ">",
}


def _key_name(key: str) -> str:
    key = key.strip()
    return _KEY_NAMES.get(key, key)


def _short(path: Path) -> str:
    text = str(path)
    return text if len(text) <= 40 else "…" + text[-39:]
