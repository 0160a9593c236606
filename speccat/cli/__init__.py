"""The ``speccat`` command line: flags in, library calls, messages and exit codes out.

Each subcommand lives in its own ``cmd_<name>.py`` module with ``NAME``, ``HELP``,
``add_arguments(parser)`` and ``run(args) -> int``; they are found by name here, so adding a
command means adding one module.
"""

from __future__ import annotations

import argparse
import importlib
import pkgutil
import sys
from types import ModuleType

from speccat import __version__
from speccat.errors import SpeccatError


def _command_modules() -> list[ModuleType]:
    names = sorted(m.name for m in pkgutil.iter_modules(__path__) if m.name.startswith("cmd_"))
    modules = [importlib.import_module(f"{__name__}.{name}") for name in names]
    return sorted(modules, key=lambda m: (getattr(m, "ORDER", 50), m.NAME))


def build_parser() -> argparse.ArgumentParser:
    parser = argparse.ArgumentParser(
        prog="speccat",
        description="Ingest, measure, identify, browse and export radio spectral lines.",
    )
    parser.add_argument("--version", action="version", version=f"speccat {__version__}")
    parser.add_argument(
        "--archive",
        metavar="URL",
        help="archive to use: a SQLite file path or a postgresql+psycopg:// URL "
        "(default: $SPECCAT_ARCHIVE, the config file, else ./speccat.sqlite)",
    )
    sub = parser.add_subparsers(dest="command", metavar="COMMAND")
    for module in _command_modules():
        p = sub.add_parser(module.NAME, help=module.HELP, description=module.HELP)
        module.add_arguments(p)
        p.set_defaults(_run=module.run)
    return parser


def main(argv: list[str] | None = None) -> int:
    parser = build_parser()
    args = parser.parse_args(argv)
    if not getattr(args, "_run", None):
        parser.print_help()
        return 1
    try:
        return int(args._run(args))
    except SpeccatError as exc:
        print(f"speccat: error: {exc}", file=sys.stderr)
        return exc.exit_code
    except KeyboardInterrupt:
        print("speccat: interrupted", file=sys.stderr)
        return 130
    except BrokenPipeError:
        if stdout_closed():  # the reader of the output went away (e.g. `| head`)
            return 0
        print("speccat: error: a pipe to another process broke unexpectedly", file=sys.stderr)
        return 1


def stdout_closed() -> bool:
    """True when standard output is a pipe whose reading end is gone."""
    import select

    try:
        poller = select.poll()
        poller.register(sys.stdout.fileno(), select.POLLOUT)
        return any(event & select.POLLERR for _, event in poller.poll(0))
    except (AttributeError, OSError, ValueError):
        return True  # no usable stdout: nothing more can be said there
