"""The catalogue's values: one ``CatalogueLine`` per transition, and the ``Catalogue`` index."""

from __future__ import annotations

import difflib
import fnmatch
from collections.abc import Iterable, Iterator, Mapping
from dataclasses import dataclass
from decimal import Decimal
from functools import cached_property
from typing import Any, Literal, cast

import numpy as np
from numpy.typing import NDArray

from speccat.catalogue import recombination as rrl
from speccat.catalogue.names import ALIASES, canonical_rrl_name, name_key, rrl_parts
from speccat.errors import CatalogueError

LineClass = Literal["recombination", "atomic", "thermal", "maser"]
LINE_CLASSES: tuple[str, ...] = ("recombination", "atomic", "thermal", "maser")


@dataclass(frozen=True)
class CatalogueLine:
    """One transition with its rest frequency and what identification needs to know about it.

    ``rest_freq_hz`` and ``rest_freq_err_hz`` are in Hz; ``width_min_kms``/``width_max_kms`` the
    typical FWHM range in km/s; ``prior`` (0–1) how commonly the transition is detected in the
    interstellar medium; ``group`` is shared by components that appear together (H/He/C/S at the
    same n and Δn, the OH 18 cm main lines, an NH₃ line and its satellites); ``element``, ``n``
    and ``dn`` are set for recombination lines only (the transition is n + dn → n).
    """

    name: str
    species: str
    transition: str
    rest_freq_hz: float
    rest_freq_err_hz: float
    reference: str
    line_class: LineClass
    prior: float
    width_min_kms: float
    width_max_kms: float
    group: str
    element: str | None = None
    n: int | None = None
    dn: int | None = None

    @property
    def rest_freq_mhz(self) -> float:
        """Rest frequency in MHz, shifted in decimal: 1420405751.768 Hz -> 1420.405751768."""
        return float(Decimal(repr(self.rest_freq_hz)).scaleb(-6))

    @classmethod
    def _bulk(cls, values: dict[str, Any]) -> CatalogueLine:
        """Make a line from already-validated ``values`` (every field, by name), fast.

        The frozen ``__init__`` sets each of the 14 fields through ``object.__setattr__``,
        about 4x slower than this (measured: 5.7 vs 1.6 us per line on the 2-core build
        machine), which matters when every computed recombination line is materialised; this
        fills the instance dictionary directly, which the frozen ``__setattr__`` does not guard.
        """
        line = object.__new__(cls)
        line.__dict__.update(values)
        return line


#: A computed recombination line not yet turned into a CatalogueLine: (element, n, dn, freq_hz).
_Pending = tuple[str, int, int, float]


def recombination_line(element: str, n: int, dn: int, freq_hz: float) -> CatalogueLine:
    """The CatalogueLine of the computed recombination line n + dn → n of ``element``."""
    letter = rrl.DN_LETTERS[dn]
    wmin, wmax = rrl.WIDTH_KMS.get(element, (1.0, 50.0))
    return CatalogueLine._bulk(
        {
            "name": f"{element}{n}{letter}",
            "species": element,
            "transition": f"n={n + dn}→{n}",
            "rest_freq_hz": freq_hz,
            "rest_freq_err_hz": 0.0,
            "reference": rrl.REFERENCE[element],
            "line_class": "recombination",
            "prior": rrl.prior(element, dn),
            "width_min_kms": wmin,
            "width_max_kms": wmax,
            "group": f"RRL {n} {letter}",
            "element": element,
            "n": n,
            "dn": dn,
        }
    )


class Catalogue:
    """An immutable, frequency-sorted set of lines with fast window and name look-ups.

    ``lines`` are given as CatalogueLine objects; ``computed`` recombination series as arrays,
    whose CatalogueLine objects are made only when asked for (``between``, ``by_name``,
    ``lines``), which keeps building the built-in catalogue fast.
    """

    def __init__(
        self, lines: Iterable[CatalogueLine] = (), computed: Iterable[rrl.RRLSeries] = ()
    ) -> None:
        given = list(lines)
        entries: list[CatalogueLine | _Pending] = list(given)
        names = [line.name for line in given]
        freqs = [np.array([line.rest_freq_hz for line in given], float)]
        for s in computed:
            n_list, dn_list = s.n.tolist(), s.dn.tolist()
            letters = [rrl.DN_LETTERS[dn] for dn in dn_list]
            names.extend(
                [f"{s.element}{n}{letter}" for n, letter in zip(n_list, letters, strict=True)]
            )
            entries.extend(
                zip([s.element] * len(n_list), n_list, dn_list, s.freq_hz.tolist(), strict=True)
            )
            freqs.append(s.freq_hz)
        self._setup(entries, names, np.concatenate(freqs))

    def _setup(
        self, entries: list[CatalogueLine | _Pending], names: list[str], freq: NDArray[np.float64]
    ) -> None:
        order = np.argsort(freq, kind="stable").tolist()
        self._entries = [entries[i] for i in order]
        self._names = [names[i] for i in order]
        self._made: list[CatalogueLine | None] = [None] * len(order)
        for index, entry in enumerate(self._entries):
            if type(entry) is not tuple:
                self._made[index] = cast(CatalogueLine, entry)
        keys = [name.lower() if name.isalnum() else name_key(name) for name in self._names]
        by_key = dict(zip(keys, range(len(keys)), strict=True))
        if len(by_key) != len(keys):
            _raise_duplicate(keys, self._names)
        self._by_key = by_key
        self._freq_hz: NDArray[np.float64] = np.ascontiguousarray(freq[order], dtype=float)
        self._freq_hz.flags.writeable = False

    def _line(self, index: int) -> CatalogueLine:
        line = self._made[index]
        if line is None:
            element, n, dn, freq_hz = cast(_Pending, self._entries[index])
            line = self._made[index] = recombination_line(element, n, dn, freq_hz)
        return line

    def __len__(self) -> int:
        return len(self._entries)

    def __iter__(self) -> Iterator[CatalogueLine]:
        return iter(self.lines)

    def __contains__(self, name: object) -> bool:
        return isinstance(name, str) and self._lookup(name) is not None

    def __repr__(self) -> str:
        return f"Catalogue({len(self)} lines)"

    def __getstate__(self) -> dict[str, Any]:
        """Pickled (as for the ingest workers) without the lines made on demand or the cached
        ``lines``/``groups``: once every line is made, the built-in catalogue would otherwise
        pickle to 2.6 MB and take ~140 ms to load instead of 0.5 MB and ~10 ms (measured)."""
        state = {k: v for k, v in self.__dict__.items() if k not in ("lines", "groups")}
        state["_made"] = [
            None if type(entry) is tuple else made
            for entry, made in zip(self._entries, self._made, strict=True)
        ]
        return state

    @cached_property
    def lines(self) -> tuple[CatalogueLine, ...]:
        """Every line, sorted by rest frequency."""
        return tuple(self._line(i) for i in range(len(self._entries)))

    @property
    def names(self) -> tuple[str, ...]:
        """The lines' names, in the order of ``lines``."""
        return tuple(self._names)

    @property
    def rest_freq_hz(self) -> NDArray[np.float64]:
        """Rest frequencies (Hz) of ``lines``, sorted ascending; a read-only array."""
        return self._freq_hz

    def between(self, fmin_hz: float, fmax_hz: float) -> list[CatalogueLine]:
        """Lines with ``fmin_hz <= rest_freq_hz <= fmax_hz`` (both ends included), by frequency."""
        lo, hi = self.index_range(fmin_hz, fmax_hz)
        return [self._line(i) for i in range(lo, hi)]

    def index_range(self, fmin_hz: float, fmax_hz: float) -> tuple[int, int]:
        """Slice bounds into ``lines`` / ``rest_freq_hz`` for ``between`` (binary search)."""
        lo = int(np.searchsorted(self._freq_hz, fmin_hz, side="left"))
        hi = int(np.searchsorted(self._freq_hz, fmax_hz, side="right"))
        return lo, max(lo, hi)

    def _lookup(self, name: str) -> CatalogueLine | None:
        key = name_key(name)
        index = self._by_key.get(key)
        if index is None and key in ALIASES:
            index = self._by_key.get(name_key(ALIASES[key]))
        if index is None:
            rrl_name = canonical_rrl_name(name)
            if rrl_name is not None:
                index = self._by_key.get(rrl_name.lower())
        return None if index is None else self._line(index)

    def by_name(self, name: str) -> CatalogueLine:
        """The line called ``name`` in any common spelling (``H109α``, ``OH 1667``, ``H I``).

        Raises CatalogueError naming the line and suggesting close names when it is unknown.
        """
        line = self._lookup(name)
        if line is not None:
            return line
        shown = name if len(name) <= 40 else name[:40] + "..."
        parts = rrl_parts(name)
        if parts is not None:
            _element, n, dn = parts
            raise CatalogueError(
                f"no recombination line {canonical_rrl_name(name)} (n={n + dn}->{n}) in the "
                "catalogue: it lies outside the catalogue's frequency range or element set"
            )
        close = difflib.get_close_matches(name_key(name), list(self._by_key), n=3, cutoff=0.75)
        hint = ""
        if close:
            hint = "; did you mean " + ", ".join(self._names[self._by_key[k]] for k in close) + "?"
        raise CatalogueError(f"unknown line name {shown!r}{hint}")

    def search(
        self,
        species: str | None = None,
        name: str | None = None,
        line_class: str | None = None,
    ) -> list[CatalogueLine]:
        """Lines whose species and name match shell-style globs (case-insensitive), by frequency.

        ``species="*CO"`` gives CO, 13CO, C18O, H2CO, ...; ``name="H1??a"``; None matches all.
        """
        sp = species.casefold() if species else None
        nm = name.casefold() if name else None
        out = []
        for index, entry in enumerate(self._entries):
            if isinstance(entry, CatalogueLine):
                entry_species, entry_class = entry.species, entry.line_class
            else:
                entry_species, entry_class = entry[0], "recombination"
            if line_class is not None and entry_class != line_class:
                continue
            if sp is not None and not fnmatch.fnmatchcase(entry_species.casefold(), sp):
                continue
            if nm is not None and not fnmatch.fnmatchcase(self._names[index].casefold(), nm):
                continue
            out.append(self._line(index))
        return out

    @cached_property
    def groups(self) -> Mapping[str, tuple[CatalogueLine, ...]]:
        """Group name -> its member lines (by frequency)."""
        members: dict[str, list[CatalogueLine]] = {}
        for line in self.lines:
            members.setdefault(line.group, []).append(line)
        return {group: tuple(lines) for group, lines in members.items()}

    def group_of(self, line: CatalogueLine | str) -> tuple[CatalogueLine, ...]:
        """The lines that share ``line``'s group (itself included)."""
        found = self.by_name(line) if isinstance(line, str) else line
        return self.groups.get(found.group, (found,))

    def merged(self, extra: Iterable[CatalogueLine]) -> Catalogue:
        """A new catalogue with ``extra`` added; an extra line replaces one of the same name.

        Among ``extra`` lines that share a name, the last one wins.
        """
        latest: dict[str, CatalogueLine] = {}
        for line in extra:
            latest[name_key(line.name)] = line
        kept = [
            entry
            for entry, entry_name in zip(self._entries, self._names, strict=True)
            if name_key(entry_name) not in latest
        ]
        entries: list[CatalogueLine | _Pending] = [*kept, *latest.values()]
        names = [_entry_name(e) for e in entries]
        freq = np.array([_entry_freq_hz(e) for e in entries], float).reshape(-1)
        out = Catalogue.__new__(Catalogue)
        out._setup(entries, names, freq)
        return out


def _raise_duplicate(keys: list[str], names: list[str]) -> None:
    first: dict[str, str] = {}
    for key, name in zip(keys, names, strict=True):
        if key in first:
            other = first[key]
            raise CatalogueError(
                f"two catalogue lines share the name {name!r}"
                + ("" if other == name else f" (as {other!r})")
            )
        first[key] = name


def _entry_freq_hz(entry: CatalogueLine | _Pending) -> float:
    return entry.rest_freq_hz if isinstance(entry, CatalogueLine) else entry[3]


def _entry_name(entry: CatalogueLine | _Pending) -> str:
    if isinstance(entry, CatalogueLine):
        return entry.name
    return f"{entry[0]}{entry[1]}{rrl.DN_LETTERS[entry[2]]}"
