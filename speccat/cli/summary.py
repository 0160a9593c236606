"""The end-of-ingest summary as rich tables (plain text when piped)."""

from __future__ import annotations

from rich.table import Table

from speccat.cli.common import console
from speccat.pipeline import IngestSummary


def print_ingest_summary(summary: IngestSummary, archive: str) -> None:
    out = console()
    failed = len(summary.failures)
    out.print(
        f"Night [bold]{summary.night}[/bold] → {archive}: "
        f"{summary.files_stored} files stored, {summary.files_skipped} already archived, "
        f"{failed} unreadable; {summary.spectra} spectra, {summary.detections} lines "
        f"({summary.identified} identified) in {summary.seconds:.1f} s"
    )
    if summary.per_line:
        table = Table(title="Lines found", title_justify="left")
        table.add_column("line")
        table.add_column("detections", justify="right")
        for name, n in sorted(summary.per_line.items(), key=lambda kv: (-kv[1], kv[0])):
            table.add_row(name, str(n))
        out.print(table)
    if summary.failures:
        table = Table(title="Unreadable files (nothing of them was stored)", title_justify="left")
        table.add_column("file", overflow="fold")
        table.add_column("reason", overflow="fold")
        for path, reason in summary.failures:
            table.add_row(path, reason)
        out.print(table)
