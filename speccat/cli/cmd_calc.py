"""``speccat calc``: the physical calculators on their own (no archive, no files)."""

from __future__ import annotations

import argparse
import json
import math
import re
import sys
from collections.abc import Callable
from typing import Any

from speccat.errors import PhysicsError
from speccat.quantities import parse_value

NAME = "calc"
HELP = "physical calculators: kinematic distance, T_e, y+, HI column and mass, Zeeman, N_e"
ORDER = 80

_ALPHA = re.compile(r"^(H|He|C)(\d+)(a|alpha)$", re.IGNORECASE)


def _add(sub: Any, name: str, help_text: str, args: list[tuple[str, str]]) -> None:
    p = sub.add_parser(name, help=help_text, description=help_text)
    for flag, text in args:
        p.add_argument(flag, metavar=flag.lstrip("-").upper().replace("-", "_"), help=text)
    p.add_argument("--format", choices=["table", "json"], default="table",
                   help="output format (default: table)")  # fmt: skip


def add_arguments(parser: argparse.ArgumentParser) -> None:
    sub = parser.add_subparsers(dest="calc", metavar="CALCULATION")
    _add(sub, "distance", "kinematic distance from Galactic (l, b) and v_LSR", [
        ("--l", "Galactic longitude, degrees"),
        ("--b", "Galactic latitude, degrees (default 0)"),
        ("--vlsr", "LSR velocity (LSRK, radio), km/s"),
        ("--vlsr-err", "velocity error, km/s (default 0)"),
        ("--streaming", "streaming allowance added in quadrature, km/s (default 7)"),
        ("--curve", "rotation curve: iau1985, reid2014 (default) or brand1993"),
    ])  # fmt: skip
    _add(sub, "te", "LTE electron temperature from a recombination line", [
        ("--freq", "line frequency (units allowed; bare numbers are GHz)"),
        ("--line-to-continuum", "peak line-to-continuum ratio T_L/T_C"),
        ("--fwhm", "line FWHM, km/s"),
        ("--y", "singly ionised helium abundance y+ (default 0.08)"),
    ])  # fmt: skip
    _add(sub, "helium", "ionised helium abundance y+ from He and H lines of the same n", [
        ("--he", "He line integrated intensity (or peak x FWHM)"),
        ("--h", "H line integrated intensity, same unit"),
    ])  # fmt: skip
    _add(sub, "hi", "HI column density, optically thin 21 cm emission", [
        ("--integral", "integrated brightness temperature, K km/s"),
    ])  # fmt: skip
    _add(sub, "hi-mass", "HI mass from a 21 cm flux integral and a distance", [
        ("--flux", "flux integral, Jy km/s"),
        ("--dist", "distance, Mpc (units allowed)"),
        ("--vsys", "systemic velocity for a Hubble-flow distance, km/s"),
        ("--h0", "Hubble constant, km/s/Mpc (default 70)"),
    ])  # fmt: skip
    _add(sub, "zeeman", "line-of-sight field from a Zeeman splitting or derivative fit", [
        ("--line", "line name with a known splitting factor: HI, OH1665, OH1667"),
        ("--factor", "splitting factor, Hz per microgauss (instead of --line)"),
        ("--split", "separation of the sigma components RCP - LCP (units allowed; bare Hz)"),
        ("--coefficient", "fitted a of V = a dI/dnu + b I, Hz (instead of --split)"),
    ])  # fmt: skip
    _add(sub, "density", "electron density from the pressure-broadened (Lorentzian) width", [
        ("--line", "alpha recombination line, e.g. H166a (or give --n)"),
        ("--n", "principal quantum number of the alpha line"),
        ("--lorentz-fwhm", "Lorentzian FWHM of a Voigt fit (units allowed; bare Hz)"),
        ("--te", "electron temperature, K (default 10000)"),
    ])  # fmt: skip


def _value(args: argparse.Namespace, name: str, unit: str, default: float | None = None) -> float:
    """The flag's value in ``unit`` (an astropy unit string; "" for a pure number)."""
    raw = getattr(args, name.replace("-", "_"))
    if raw is None:
        if default is None:
            raise PhysicsError(f"calc {args.calc}: --{name} is required")
        return default
    return parse_value(str(raw), unit, f"--{name}")


def _distance(args: argparse.Namespace) -> dict[str, Any]:
    from speccat.physics import kinematic

    kms = "km/s"
    sol = kinematic.kinematic_distance(
        _value(args, "l", "deg"), _value(args, "b", "deg", 0.0), _value(args, "vlsr", kms),
        _value(args, "vlsr-err", kms, 0.0), args.curve or kinematic.DEFAULT_CURVE,
        _value(args, "streaming", kms, kinematic.STREAMING_KMS),
    )  # fmt: skip
    return sol.as_dict()


def _te(args: argparse.Namespace) -> dict[str, Any]:
    from speccat.physics import diagnostics

    y = _value(args, "y", "", diagnostics.Y_PLUS_DEFAULT)
    te = diagnostics.te_lte_k(_value(args, "freq", "GHz"), _value(args, "line-to-continuum", ""),
                              _value(args, "fwhm", "km/s"), y)  # fmt: skip
    return {"te_k": te, "y_plus": y}


def _helium(args: argparse.Namespace) -> dict[str, Any]:
    from speccat.physics import diagnostics

    return {"y_plus": diagnostics.y_plus(_value(args, "he", ""), _value(args, "h", ""))}


def _hi(args: argparse.Namespace) -> dict[str, Any]:
    from speccat.physics import diagnostics

    return {"n_hi_cm2": diagnostics.n_hi_cm2(_value(args, "integral", "K km/s"))}


def _hi_mass(args: argparse.Namespace) -> dict[str, Any]:
    from speccat.physics import diagnostics

    if (args.dist is None) == (args.vsys is None):
        raise PhysicsError("calc hi-mass: give exactly one of --dist or --vsys")
    if args.dist is not None:
        dist = _value(args, "dist", "Mpc")
    else:
        h0 = _value(args, "h0", "km/(s Mpc)", diagnostics.H0_DEFAULT)
        dist = diagnostics.hubble_distance_mpc(_value(args, "vsys", "km/s"), h0)
    flux = _value(args, "flux", "Jy km/s")
    return {"m_hi_msun": diagnostics.hi_mass_msun(flux, dist), "dist_mpc": dist}


def _zeeman(args: argparse.Namespace) -> dict[str, Any]:
    from speccat.physics import zeeman

    if (args.line is None) == (args.factor is None):
        raise PhysicsError("calc zeeman: give exactly one of --line or --factor")
    if args.line is not None:
        names = {k.upper(): k for k in zeeman.SPLIT_HZ_PER_UG}
        key = names.get(args.line.strip().upper().replace(" ", ""))
        if key is None:
            raise PhysicsError(f"calc zeeman: no splitting factor for {args.line!r} "
                               f"(known: {', '.join(zeeman.SPLIT_HZ_PER_UG)})")  # fmt: skip
        factor = zeeman.SPLIT_HZ_PER_UG[key]
    else:
        factor = _value(args, "factor", "")
        if not factor > 0:
            raise PhysicsError("calc zeeman: --factor must be positive")
    if (args.split is None) == (args.coefficient is None):
        raise PhysicsError("calc zeeman: give exactly one of --split or --coefficient")
    if args.split is not None:
        b = zeeman.field_from_split(_value(args, "split", "Hz"), factor)
    else:
        b = zeeman.field_from_coefficient(_value(args, "coefficient", "Hz"), factor)
    return {"b_los_ug": b, "split_hz_per_ug": factor}


def _density(args: argparse.Namespace) -> dict[str, Any]:
    from speccat.physics import diagnostics

    if (args.line is None) == (args.n is None):
        raise PhysicsError("calc density: give exactly one of --line or --n")
    if args.line is not None:
        match = _ALPHA.match(args.line.strip())
        if match is None:
            raise PhysicsError(f"calc density: {args.line!r} is not an alpha recombination line "
                               "name such as H166a")  # fmt: skip
        n = int(match.group(2))
    else:
        n_value = _value(args, "n", "")
        if n_value != math.floor(n_value):
            raise PhysicsError(f"calc density: --n must be an integer, got {args.n}")
        n = int(n_value)
    te = _value(args, "te", "K", 1.0e4)
    ne = diagnostics.ne_from_lorentz_cm3(_value(args, "lorentz-fwhm", "Hz"), n, te)
    return {"ne_cm3": ne, "n": n, "te_k": te}


_CALCS: dict[str, Callable[[argparse.Namespace], dict[str, Any]]] = {
    "distance": _distance, "te": _te, "helium": _helium, "hi": _hi, "hi-mass": _hi_mass,
    "zeeman": _zeeman, "density": _density,
}  # fmt: skip


def _clean(value: Any) -> Any:
    return None if isinstance(value, float) and not math.isfinite(value) else value


def run(args: argparse.Namespace) -> int:
    if not getattr(args, "calc", None):
        raise PhysicsError(f"calc: name a calculation ({', '.join(_CALCS)}); see speccat calc -h")
    result = {k: _clean(v) for k, v in _CALCS[args.calc](args).items()}
    if args.format == "json":
        json.dump(result, sys.stdout, indent=1, allow_nan=False)
        sys.stdout.write("\n")
        return 0
    from speccat.cli.common import write_records

    rows = [{"quantity": k, "value": v} for k, v in result.items()]
    write_records(rows, ["quantity", "value"], "table", title=f"speccat calc {args.calc}")
    return 0
