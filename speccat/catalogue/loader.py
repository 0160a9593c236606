"""Reading catalogue CSV files and building the built-in catalogue.

The curated file (``curated.csv`` in this package) and a user's extra file share one format:
UTF-8 CSV, ``#`` comment lines, a header row, one transition per row, with the columns

``name, species, transition, rest_freq_mhz, uncertainty_mhz, reference, line_class, prior,
width_min_kms, width_max_kms, group``

In a user file only ``name``, ``species`` and ``rest_freq_mhz`` are required; the others default
to an empty transition, zero uncertainty, the file name as reference, class ``thermal``, prior
0.5, the class's typical width range and a group of its own. A user row replaces a built-in line
of the same name.
"""

from __future__ import annotations

import csv
import functools
import io
import math
from collections.abc import Iterator
from decimal import Decimal, InvalidOperation
from importlib import resources
from pathlib import Path
from typing import cast

from speccat.catalogue import recombination as rrl
from speccat.catalogue.lines import LINE_CLASSES, Catalogue, CatalogueLine, LineClass
from speccat.catalogue.names import is_ascii_name, name_key, rrl_parts
from speccat.errors import CatalogueError

COLUMNS: tuple[str, ...] = (
    "name",
    "species",
    "transition",
    "rest_freq_mhz",
    "uncertainty_mhz",
    "reference",
    "line_class",
    "prior",
    "width_min_kms",
    "width_max_kms",
    "group",
)
REQUIRED_USER_COLUMNS = ("name", "species", "rest_freq_mhz")

#: Typical FWHM range (km/s) by class when a user row leaves it empty (common practice).
DEFAULT_WIDTH_KMS: dict[str, tuple[float, float]] = {
    "recombination": (10.0, 50.0),
    "atomic": (1.0, 700.0),
    "thermal": (0.3, 15.0),
    "maser": (0.1, 3.0),
}


class _Row:
    """One CSV row with the context for error messages."""

    def __init__(self, source: str, line_no: int, values: dict[str, str]) -> None:
        self.source = source
        self.line_no = line_no
        self.values = values

    def fail(self, field: str, message: str) -> CatalogueError:
        return CatalogueError(f"{self.source}: row {self.line_no}: field {field!r}: {message}")

    def text(self, field: str, default: str | None = None) -> str:
        value = (self.values.get(field) or "").strip()
        if not value:
            if default is None:
                raise self.fail(field, "is empty")
            return default
        return value

    def number(self, field: str, default: float | None = None, lo: float = -math.inf) -> float:
        raw = (self.values.get(field) or "").strip()
        if not raw:
            if default is None:
                raise self.fail(field, "is empty")
            return default
        try:
            value = float(raw)
        except ValueError:
            raise self.fail(field, f"{raw[:30]!r} is not a number") from None
        if not math.isfinite(value) or value < lo:
            raise self.fail(field, f"{raw[:30]!r} is out of range (must be finite and >= {lo:g})")
        return value


def _iter_rows(text: str, source: str, strict: bool) -> Iterator[_Row]:
    lines = [ln if not ln.lstrip().startswith("#") else "" for ln in text.splitlines()]
    reader = csv.reader(io.StringIO("\n".join(lines)), strict=True)
    header: list[str] | None = None
    try:
        for record in reader:
            if not record or all(not cell.strip() for cell in record):
                continue
            if header is None:
                header = [cell.strip().lower() for cell in record]
                _check_header(header, source, strict)
                continue
            if len(record) != len(header):
                raise CatalogueError(
                    f"{source}: row {reader.line_num}: expected {len(header)} fields, "
                    f"found {len(record)}"
                )
            yield _Row(source, reader.line_num, dict(zip(header, record, strict=True)))
    except csv.Error as exc:
        raise CatalogueError(f"{source}: row {reader.line_num}: not valid CSV ({exc})") from None
    if header is None:
        raise CatalogueError(f"{source}: no header row (expected columns {', '.join(COLUMNS)})")


def _check_header(header: list[str], source: str, strict: bool) -> None:
    unknown = [c for c in header if c not in COLUMNS]
    if unknown:
        raise CatalogueError(
            f"{source}: unknown column {unknown[0]!r} (allowed: {', '.join(COLUMNS)})"
        )
    required = COLUMNS if strict else REQUIRED_USER_COLUMNS
    missing = [c for c in required if c not in header]
    if missing:
        raise CatalogueError(f"{source}: missing column {missing[0]!r}")
    if len(set(header)) != len(header):
        raise CatalogueError(f"{source}: a column name appears twice in the header")


def _line_from_row(row: _Row, strict: bool) -> CatalogueLine:
    name = row.text("name")
    if not is_ascii_name(name):
        raise row.fail("name", f"{name[:30]!r} must be printable ASCII without spaces")
    line_class = row.text("line_class", None if strict else "thermal")
    if line_class not in LINE_CLASSES:
        raise row.fail("line_class", f"{line_class[:30]!r} is not one of {', '.join(LINE_CLASSES)}")
    wmin_default, wmax_default = DEFAULT_WIDTH_KMS[line_class]
    freq_mhz = row.number("rest_freq_mhz")
    if freq_mhz <= 0:
        raise row.fail("rest_freq_mhz", "must be positive")
    err_mhz = row.number("uncertainty_mhz", None if strict else 0.0, lo=0.0)
    prior = row.number("prior", None if strict else 0.5, lo=0.0)
    if prior > 1:
        raise row.fail("prior", f"{prior:g} is above 1")
    wmin = row.number("width_min_kms", None if strict else wmin_default, lo=0.0)
    wmax = row.number("width_max_kms", None if strict else wmax_default, lo=0.0)
    if wmin > wmax:
        raise row.fail("width_max_kms", f"{wmax:g} is below width_min_kms {wmin:g}")
    element = n = dn = None
    if line_class == "recombination":
        parts = rrl_parts(name)
        if parts is not None:
            element, n, dn = parts
    return CatalogueLine(
        name=name,
        species=row.text("species"),
        transition=row.text("transition", None if strict else ""),
        rest_freq_hz=_mhz_to_hz(row.values["rest_freq_mhz"], freq_mhz),
        rest_freq_err_hz=_mhz_to_hz(row.values.get("uncertainty_mhz") or "", err_mhz),
        reference=row.text("reference", None if strict else f"user catalogue {row.source}"),
        line_class=cast(LineClass, line_class),
        prior=prior,
        width_min_kms=wmin,
        width_max_kms=wmax,
        group=row.text("group", name),
        element=element,
        n=n,
        dn=dn,
    )


def _mhz_to_hz(text: str, value_mhz: float) -> float:
    """Hz from the MHz text, scaled in decimal so ``1420.405751768`` gives ``1420405751.768``."""
    try:
        return float(Decimal(text.strip()).scaleb(6))
    except (InvalidOperation, ValueError):
        return value_mhz * 1e6


def parse_csv(text: str, source: str, strict: bool = False) -> list[CatalogueLine]:
    """Lines from catalogue CSV ``text``; ``source`` names it in errors.

    ``strict`` requires every column and value (the curated file); otherwise defaults apply.
    Raises CatalogueError naming the source, the row (file line number) and the field.
    """
    lines: list[CatalogueLine] = []
    seen: dict[str, int] = {}
    for row in _iter_rows(text, source, strict):
        line = _line_from_row(row, strict)
        key = name_key(line.name)
        if key in seen:
            raise row.fail("name", f"{line.name!r} already given in row {seen[key]}")
        seen[key] = row.line_no
        lines.append(line)
    return lines


def read_csv(path: str | Path) -> list[CatalogueLine]:
    """Lines from a user's catalogue CSV file (see the module docstring for the columns)."""
    p = Path(path).expanduser()
    try:
        text = p.read_text(encoding="utf-8-sig")
    except FileNotFoundError:
        raise CatalogueError(f"{path}: catalogue file not found") from None
    except (OSError, UnicodeDecodeError) as exc:
        raise CatalogueError(f"{path}: cannot read catalogue file ({exc})") from None
    return parse_csv(text, str(path))


def curated_lines() -> list[CatalogueLine]:
    """The curated molecular and atomic lines shipped in ``curated.csv``."""
    text = resources.files("speccat.catalogue").joinpath("curated.csv").read_text("utf-8")
    return parse_csv(text, "curated.csv", strict=True)


def recombination_series(
    fmin_hz: float = rrl.FMIN_HZ, fmax_hz: float = rrl.FMAX_HZ
) -> list[rrl.RRLSeries]:
    """Computed H, He, C and S recombination lines, Δn = 1…5, between ``fmin_hz`` and ``fmax_hz``."""
    return [rrl.series(element, fmin_hz, fmax_hz) for element in rrl.ELEMENTS]


@functools.cache
def builtin() -> Catalogue:
    """The built-in catalogue: computed recombination lines plus the curated file (cached)."""
    return Catalogue(curated_lines(), computed=recombination_series())


def load(extra: str | Path | None = None) -> Catalogue:
    """The built-in catalogue merged with the user file ``extra`` (None or "" for none)."""
    base = builtin()
    if extra is None or str(extra).strip() == "":
        return base
    return base.merged(read_csv(extra))
