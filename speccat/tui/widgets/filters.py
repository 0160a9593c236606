"""The filter form: one labelled field per filter, applied as you type (debounced).

The form only collects strings; turning them into a query is the archive's ``Filters.parse``
(passed in), so the browser, ``speccat query`` and ``speccat export`` accept exactly the same
values. A value that does not parse shows its one-line message under the fields.
"""

from __future__ import annotations

import asyncio
from collections.abc import Callable, Iterable
from dataclasses import dataclass
from typing import Any, ClassVar

from textual import on, work
from textual.app import ComposeResult
from textual.binding import Binding, BindingType
from textual.containers import Grid, Horizontal
from textual.message import Message
from textual.suggester import SuggestFromList
from textual.widget import Widget
from textual.widgets import Input, Label, Select

from speccat.errors import SpeccatError
from speccat.tui.notices import ReportsWorkerFailures

DEBOUNCE_S = 0.3


@dataclass(frozen=True)
class Field:
    """A text filter: ``key`` is the Filters.parse key; ``label`` and ``hint`` are shown."""

    key: str
    label: str
    hint: str
    suggest: bool = False


TEXT_FIELDS: tuple[Field, ...] = (
    Field("source", "source", "name or glob  N*", suggest=True),
    Field("species", "species", "glob  He, CH3OH", suggest=True),
    Field("line", "line", "H109a, OH1667", suggest=True),
    Field(
        "vel",
        "v_LSR",
        "km/s  MIN:MAX",
    ),
    Field(
        "freq",
        "freq",
        "MIN:MAX  1.4GHz:",
    ),
    Field("snr", "S/N ≥", "minimum S/N"),
    Field("night", "night", "label", suggest=True),
)
KIND_CHOICES = (("emission", "emission"), ("absorption", "absorption"))
UNIDENTIFIED_CHOICES = (("unidentified only", "yes"),)

#: The form's keys (shown by the help screen; tab and arrows are the fields' own).
FILTER_KEYS: list[BindingType] = [
    Binding("tab", "app.focus_next", "Next field", show=False, id="filters.next"),
    Binding("shift+tab", "app.focus_previous", "Previous field", show=False, id="filters.prev"),
    Binding(
        "enter",
        "apply",
        "Apply now (otherwise 0.3 s after you stop typing)",
        show=False,
        id="filters.apply",
    ),
    Binding(
        "right",
        "accept_suggestion",
        "Take the greyed-out suggestion",
        show=False,
        id="filters.suggestion",
    ),
    Binding(
        "f4",
        "pick",
        "Pick a value",
        id="filters.pick",
        tooltip="choose from the archive's sources, species, lines or nights",
    ),
]


class FilterForm(ReportsWorkerFailures, Widget):
    """Labelled filter fields in a grid, a message line, and the live match count."""

    BINDINGS: ClassVar[list[BindingType]] = FILTER_KEYS

    DEFAULT_CSS = """
    FilterForm { height: auto; }
    FilterForm Grid { grid-size: 3; grid-gutter: 0 1; height: auto; }
    FilterForm .field { height: 1; }
    FilterForm .field Label { width: 9; color: $text-muted; }
    FilterForm .field Input, FilterForm .field Select { width: 1fr; }
    FilterForm .message-row { height: auto; max-height: 3; }
    FilterForm #filter-message { height: auto; width: 1fr; color: $text-muted; }
    FilterForm #filter-message.-error { color: $error; text-style: bold; }
    FilterForm #match-count { height: 1; width: auto; text-style: bold; }
    """

    class Applied(Message):
        """The form's values parsed: ``filters`` is what Filters.parse returned."""

        def __init__(self, filters: Any, values: dict[str, str]) -> None:
            self.filters, self.values = filters, values
            super().__init__()

    def __init__(self, parse: Callable[[dict[str, str]], Any], *, id: str | None = None) -> None:
        super().__init__(id=id)
        self._parse = parse
        self.choices: dict[str, list[str]] = {}

    def compose(self) -> ComposeResult:
        with Grid():
            for f in TEXT_FIELDS:
                with Horizontal(classes="field"):
                    yield Label(f.label, id=f"label-{f.key}")
                    yield Input(placeholder=f.hint, id=f"filter-{f.key}", compact=True)
            with Horizontal(classes="field"):
                yield Label("kind", id="label-kind")
                yield Select(KIND_CHOICES, prompt="any", id="filter-kind", compact=True)
            with Horizontal(classes="field"):
                yield Label("identity", id="label-unidentified")
                yield Select(
                    UNIDENTIFIED_CHOICES, prompt="any", id="filter-unidentified", compact=True
                )
        with Horizontal(classes="message-row"):
            yield Label("", id="filter-message")
            yield Label("", id="match-count")

    def on_mount(self) -> None:
        self.show_message("no filter: every detection (/ edits the filters)")

    def on_descendant_focus(self) -> None:
        if not self.query_one("#filter-message", Label).has_class("-error"):
            self.show_message("filters apply as you type · tab: next field · F4: pick · esc: table")

    def on_resize(self) -> None:
        # three columns fit 80 cells; wide terminals get the whole form on fewer rows
        self.query_one(Grid).styles.grid_size_columns = max(3, min(5, self.size.width // 38))

    def values(self) -> dict[str, str]:
        """The current strings, keyed as Filters.parse expects; empty fields are left out."""
        out = {f.key: self.query_one(f"#filter-{f.key}", Input).value.strip() for f in TEXT_FIELDS}
        kind = self.query_one("#filter-kind", Select).value
        out["kind"] = str(kind) if isinstance(kind, str) else ""
        unid = self.query_one("#filter-unidentified", Select).value
        out["unidentified"] = str(unid) if isinstance(unid, str) else ""
        return {k: v for k, v in out.items() if v}

    def set_value(self, key: str, value: str) -> None:
        """Fill a text field (used by pickers and tests); applying follows the usual debounce."""
        self.query_one(f"#filter-{key}", Input).value = value

    def clear(self) -> None:
        for f in TEXT_FIELDS:
            self.query_one(f"#filter-{f.key}", Input).value = ""
        self.query_one("#filter-kind", Select).clear()
        self.query_one("#filter-unidentified", Select).clear()

    def set_suggestions(self, key: str, values: Iterable[str]) -> None:
        words = [str(v) for v in values if v]
        self.choices[key] = words
        if words:
            self.query_one(f"#filter-{key}", Input).suggester = SuggestFromList(
                words, case_sensitive=False
            )

    def show_count(self, text: str) -> None:
        self.query_one("#match-count", Label).update(text)

    def show_message(self, text: str, error: bool = False) -> None:
        label = self.query_one("#filter-message", Label)
        label.update(text)
        label.set_class(error, "-error")

    @on(Input.Changed)
    @on(Select.Changed)
    def _changed(self, event: Message) -> None:
        event.stop()
        self._debounce()

    @on(Input.Submitted)
    def _submitted(self, event: Input.Submitted) -> None:
        event.stop()
        self.apply_now()

    @work(exclusive=True, group="filter-debounce")
    async def _debounce(self) -> None:
        await asyncio.sleep(DEBOUNCE_S)
        self.apply_now()

    def action_pick(self) -> None:
        """Open the list of archive values for the focused field (or the source field)."""
        from speccat.tui.widgets.modals import ValuePicker

        focused = self.app.focused
        key = "source"
        if (
            isinstance(focused, Input)
            and focused.id
            and focused.id.removeprefix("filter-") in self.choices
        ):
            key = focused.id.removeprefix("filter-")
        values = self.choices.get(key, [])
        if not values:
            self.notify(f"no {key} values known yet (the list loads in the background)")
            return

        def picked(value: str | None) -> None:
            if value is not None:
                self.set_value(key, value)
                self.apply_now()

        self.app.push_screen(ValuePicker(key, values), picked)

    def action_apply(self) -> None:
        self.apply_now()

    def action_accept_suggestion(self) -> None:
        if isinstance(self.app.focused, Input):
            self.app.focused.action_cursor_right()

    def apply_now(self) -> None:
        """Parse the fields now; post Applied, or show why a value is not understood."""
        values = self.values()
        try:
            filters = self._parse(values)
        except SpeccatError as exc:
            self.show_message(f"✗ {_in_form_terms(str(exc))}", error=True)
            return
        self.show_message(_describe(values) if values else "no filter: every detection")
        self.post_message(self.Applied(filters, values))


def _describe(values: dict[str, str]) -> str:
    return "filter: " + ", ".join(f"{k}={v}" for k, v in values.items())


def _in_form_terms(message: str) -> str:
    """Name the form's field rather than the command-line flag in a FilterError message."""
    labels = {f.key: f.label for f in TEXT_FIELDS} | {"kind": "kind", "unidentified": "identity"}
    for key, label in labels.items():
        message = message.replace(f"--{key}:", f"{label}:")
    return message
