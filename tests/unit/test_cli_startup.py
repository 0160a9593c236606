"""Every command starts without the heavy libraries it does not need.

Building the parser imports every command module; ``speccat --help`` (and the start of each
command) paid for astropy.units and SQLAlchemy before, about 1.2 s. A bare number in a
frequency or a calculator flag needs neither.
"""

from __future__ import annotations

import subprocess
import sys

CHECK = """
import sys
from speccat.cli import build_parser
build_parser()
from speccat.quantities import parse_frequency_hz, parse_value
assert parse_frequency_hz("1420.5") == 1420.5e6
assert parse_value("-3.5", "km/s", "--vel") == -3.5
heavy = sorted(m for m in ("astropy.units", "sqlalchemy", "scipy", "textual") if m in sys.modules)
print(",".join(heavy))
"""


def test_parser_and_bare_numbers_load_no_heavy_library() -> None:
    out = subprocess.run(
        [sys.executable, "-c", CHECK], capture_output=True, text=True, check=True
    ).stdout
    assert out.strip() == ""


def test_a_typed_unit_still_converts() -> None:
    from speccat.quantities import parse_value

    # 1 GHz = 1000 MHz and 1 km/s = 1000 m/s (SI prefixes; common practice)
    assert parse_value("1.5 GHz", "MHz", "--freq") == 1500.0
    assert parse_value("2500 m/s", "km/s", "--vel") == 2.5
