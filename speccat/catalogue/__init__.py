"""The rest-frequency catalogue: computed recombination lines and curated, referenced lines.

    >>> from speccat.catalogue import builtin
    >>> cat = builtin()
    >>> cat.by_name("H109α").rest_freq_hz        # n = 110 -> 109
    >>> cat.between(1.42e9, 1.43e9)              # lines in a window, by frequency
    >>> cat.search(species="*CO")

Line names follow the ASCII scheme described in ``speccat.catalogue.names``.
"""

from __future__ import annotations

from speccat.catalogue.lines import LINE_CLASSES, Catalogue, CatalogueLine, LineClass
from speccat.catalogue.loader import COLUMNS, builtin, load, parse_csv, read_csv
from speccat.catalogue.names import canonical_rrl_name, name_key, rrl_parts

__all__ = [
    "COLUMNS",
    "LINE_CLASSES",
    "Catalogue",
    "CatalogueLine",
    "LineClass",
    "builtin",
    "canonical_rrl_name",
    "load",
    "name_key",
    "parse_csv",
    "parse_line_name",
    "read_csv",
    "rrl_parts",
]


def parse_line_name(text: str, catalogue: Catalogue | None = None) -> str:
    """The canonical ASCII name of a line typed in any common spelling.

    ``"H109alpha"`` -> ``"H109a"``, ``"OH 1667"`` -> ``"OH1667"``, ``"21cm"`` -> ``"HI"``.
    The name must exist in ``catalogue`` (default: the built-in one); raises CatalogueError.
    """
    return (catalogue if catalogue is not None else builtin()).by_name(text).name
