"""speccat's exceptions: one base class and a few domain subclasses.

They carry a message meant for a person; the CLI and the TUI print it on one line.
``exit_code`` is what the CLI exits with (DESIGN.md: 1 bad input, 2 archive unreachable/corrupt).
"""

from __future__ import annotations


class SpeccatError(Exception):
    """Base class of every error speccat reports to a user."""

    exit_code = 1


class SpectrumReadError(SpeccatError):
    """A file could not be read as a spectrum; ``reason`` says why in a few words."""

    def __init__(self, path: object, reason: str) -> None:
        self.path = str(path)
        self.reason = reason
        super().__init__(f"{self.path}: {reason}")


class CatalogueError(SpeccatError):
    """A catalogue file or a line name could not be understood."""


class FilterError(SpeccatError):
    """A filter value (from a flag or the TUI form) is malformed."""


class ArchiveError(SpeccatError):
    """The archive is unreachable, corrupt, read-only or of an unknown schema version."""

    exit_code = 2


class ExportError(SpeccatError):
    """An export could not be written (file exists, unknown suffix, ...)."""


class PhysicsError(SpeccatError):
    """A physical calculation was asked for outside its domain (e.g. beyond the tangent point)."""
