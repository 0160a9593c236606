"""The one place a failed worker becomes a notice on screen (never a traceback).

``Worker.StateChanged`` does not bubble, so every node that runs workers mixes this in; the
handler itself is written once, here.
"""

from __future__ import annotations

from textual.worker import Worker, WorkerState

from speccat.errors import SpeccatError


def failure_text(error: BaseException | None) -> str:
    """One line for the user: SpeccatErrors speak for themselves, others get their type."""
    text = str(error) if isinstance(error, SpeccatError) else f"{type(error).__name__}: {error}"
    lines = text.strip().splitlines() or [""]
    first = lines[0]
    return first if len(first) <= 200 else first[:199] + "…"


class ReportsWorkerFailures:
    """Mixin for widgets and screens: show a failed worker's error as an error notice."""

    def on_worker_state_changed(self, event: Worker.StateChanged) -> None:
        if event.state != WorkerState.ERROR:
            return
        worker = event.worker
        worker.node.app.notify(
            failure_text(worker.error),
            title=f"{worker.group} failed",
            severity="error",
            timeout=8,
        )
