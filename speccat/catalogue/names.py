"""Line names: the ASCII scheme speccat uses, and reading the spellings people type.

The scheme (every name is ASCII, without spaces):

- recombination lines: element, lower level n, Δn letter ``a b g d e`` (α β γ δ ε):
  ``H109a`` (n = 110 → 109), ``He109a``, ``C109a``, ``S109a``, ``H138b``, ``H100g``;
- the neutral-hydrogen 21 cm line ``HI``; the deuterium 92 cm line ``DI``; ``3He+`` (8.7 GHz);
- OH and CH Λ-doublet lines: species and the integer part of the frequency in MHz
  (``OH1612``, ``OH1665``, ``OH1667``, ``OH1720``, ``OH6035``, ``CH3335``);
- H₂O: integer GHz (``H2O22``, ``H2O183``); CH₃OH and H₂CO: GHz with one decimal
  (``CH3OH6.7``, ``CH3OH95.2``, ``H2CO4.8``), more decimals only where one would be ambiguous
  (``CH3OH96.741``);
- NH₃ inversion lines: ``NH3(J,K)``; the quadrupole hyperfine satellite groups of (1,1) and
  (2,2) are ``NH3(1,1)s-2`` … ``NH3(1,1)s+2``, numbered outwards from the main line in frequency
  (``s-1`` the inner satellite below it, ``s-2`` the outer one below it);
- rotational lines: species and ``(Jup-Jlow)``: ``CO(1-0)``, ``13CO(2-1)``; vibrationally excited
  ones add ``v=N`` (``SiO(1-0)v=1``); hyperfine components add their quantum numbers
  (``HCN(1-0)F=2-1``, ``N2H+(1-0)F1=2-1,F=3-2``, ``CN(1-0)J=3/2-1/2,F=5/2-3/2``); a name without
  them (``HCN(1-0)``) means the strongest component; N_J levels are written ``CCS(4_3-3_2)``.

Matching (``name_key``) ignores case, spaces, parentheses, commas and ``J=``; reads Greek
letters and their English names (``H109α``, ``H109alpha``), sub/superscript digits (``NH₃``,
``¹³CO``, ``HCO⁺``), and dash or arrow variants (``–``, ``−``, ``→``).
"""

from __future__ import annotations

import re
import unicodedata

from speccat.catalogue.recombination import DN_LETTERS

_GREEK = {"α": "a", "β": "b", "γ": "g", "δ": "d", "ε": "e"}
_GREEK_WORDS = (("alpha", "a"), ("beta", "b"), ("gamma", "g"), ("delta", "d"), ("epsilon", "e"))
_DASHES = {"–": "-", "—": "-", "−": "-", "‐": "-", "→": "-", "->": "-"}
_LETTER_DN = {letter: dn for dn, letter in DN_LETTERS.items()}
_RRL = re.compile(r"^(he|h|c|s)(\d{1,4})(alpha|beta|gamma|delta|epsilon|[abgde])$")
_ELEMENT_CASE = {"h": "H", "he": "He", "c": "C", "s": "S"}

#: Other spellings of built-in names, by key (see ``name_key``) -> canonical name.
ALIASES: dict[str, str] = {
    "21cm": "HI",
    "hi21cm": "HI",
    "h21cm": "HI",
    "92cm": "DI",
    "h2o": "H2O22",
    "water": "H2O22",
    "hcn1-0": "HCN(1-0)F=2-1",
    "n2h+1-0": "N2H+(1-0)F1=2-1,F=3-2",
    "cn1-0": "CN(1-0)J=3/2-1/2,F=5/2-3/2",
    "c2h1-0": "C2H(1-0)J=3/2-1/2,F=2-1",
    "ch9cm": "CH3335",
}


def _fold(text: str) -> str:
    out = unicodedata.normalize("NFKC", text).casefold()
    for old, new in _DASHES.items():
        out = out.replace(old, new)
    for old, new in _GREEK.items():
        out = out.replace(old, new)
    return out


_DROP = str.maketrans("", "", " \t()[],_")


def name_key(text: str) -> str:
    """The matching key of a name: see the module docstring."""
    # Fast path for plain ASCII (every built-in name): no Unicode normalisation needed.
    out = text.lower().replace("->", "-") if text.isascii() else _fold(text)
    out = out.translate(_DROP)
    return out.replace("j=", "") if "j=" in out else out


def rrl_parts(text: str) -> tuple[str, int, int] | None:
    """``(element, n, dn)`` when ``text`` names a recombination line (any spelling), else None.

    ``"H109α"``, ``"h109 alpha"`` and ``"H109a"`` all give ``("H", 109, 1)``.
    """
    m = _RRL.match(name_key(text))
    if m is None:
        return None
    element, n_text, letter = m.groups()
    n = int(n_text)
    if n < 1:
        return None
    return _ELEMENT_CASE[element], n, _LETTER_DN[letter[0]]


def canonical_rrl_name(text: str) -> str | None:
    """The ASCII name of a recombination line in any spelling (``H109alpha`` -> ``H109a``)."""
    parts = rrl_parts(text)
    if parts is None:
        return None
    element, n, dn = parts
    return f"{element}{n}{DN_LETTERS[dn]}"


def is_ascii_name(name: str) -> bool:
    """True for a name usable in the catalogue: printable ASCII without whitespace."""
    return bool(name) and all(33 <= ord(ch) < 127 for ch in name)
