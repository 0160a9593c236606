"""``speccat measure FILE...``: read, reduce and identify files without touching an archive."""

from __future__ import annotations

import argparse
import json
import math
import sys
from typing import Any

from speccat.config import load_settings
from speccat.model import C_KMS, Detection, SpectrumResult

NAME = "measure"
HELP = "measure and identify the lines in files, without an archive"
ORDER = 20


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument(
        "files", nargs="+", metavar="FILE", help="spectrum files (.fits, .csv, .gz)"
    )
    parser.add_argument(
        "--format",
        choices=["table", "json"],
        default="table",
        help="output format (default: table)",
    )
    parser.add_argument(
        "--catalogue", metavar="FILE", help="extra catalogue file merged with the built-in lines"
    )
    parser.add_argument(
        "--detect-sigma", type=float, metavar="S", help="line-finding threshold in sigma"
    )


def _num(x: float | None) -> float | None:
    return None if x is None or not math.isfinite(x) else float(x)


def line_record(det: Detection) -> dict[str, Any]:
    """One line of one spectrum, as ``measure --format json`` shows it."""
    fit, line = det.fit, det.line
    runner = next((c for c in det.candidates if line is None or c.name != line.name), None)
    scale = C_KMS / (line.rest_freq_hz if line is not None else fit.center_hz)
    return {
        "line": line.name if line else None,
        "species": line.species if line else None,
        "transition": line.transition if line else None,
        "rest_freq_mhz": line.rest_freq_hz / 1e6 if line else None,
        "obs_freq_mhz": fit.center_hz / 1e6,
        "obs_freq_err_mhz": _num(fit.center_err_hz / 1e6),
        "v_lsr_kms": _num(det.v_lsr_kms),
        "v_lsr_err_kms": _num(det.v_lsr_err_kms),
        "peak": _num(fit.peak),
        "peak_err": _num(fit.peak_err),
        "fwhm_kms": _num(det.fwhm_kms),
        "fwhm_err_kms": _num(det.fwhm_err_kms),
        "integral": _num(det.integral_kms),
        "integral_err": _num(det.integral_err_kms),
        "w50_kms": _num(fit.w50_hz * scale) if fit.w50_hz is not None else None,
        "w20_kms": _num(fit.w20_hz * scale) if fit.w20_hz is not None else None,
        "snr": _num(fit.snr),
        "chi2_red": _num(fit.chi2_red),
        "kind": str(fit.kind),
        "profile": fit.profile,
        "id_score": _num(det.id_score),
        "runner_up": runner.name if runner else None,
        "runner_up_score": _num(runner.score) if runner else None,
        "b_los_ug": _num(det.b_los_ug),
        "b_los_err_ug": _num(det.b_los_err_ug),
        "flags": list(det.flags),
    }


def spectrum_record(res: SpectrumResult) -> dict[str, Any]:
    s, m = res.spectrum, res.measurement
    return {
        "file": s.origin.path,
        "hdu": s.origin.hdu,
        "row": s.origin.row,
        "source": s.source,
        "obs_time": s.obs_time.isoformat() if s.obs_time else None,
        "telescope": s.telescope,
        "stokes": list(s.stokes),
        "measured_stokes": m.stokes,
        "intensity_unit": s.intensity_unit,
        "channels": s.n_channels,
        "freq_min_mhz": float(s.freq_hz[0]) / 1e6,
        "freq_max_mhz": float(s.freq_hz[-1]) / 1e6,
        "channel_width_khz": s.channel_width_hz / 1e3,
        "specsys": s.specsys or None,
        "lsrk_factor": res.lsrk_factor,
        "frame_flag": res.frame_flag,
        "rms": _num(m.rms),
        "continuum": _num(m.continuum),
        "flags": list(m.flags),
        "lines": [line_record(d) for d in res.detections],
    }


def _pm(value: float | None, err: float | None) -> str:
    """``value ± err`` with the value rounded to the error's second significant digit."""
    if value is None:
        return ""
    if err is None or not math.isfinite(err) or err <= 0:
        return f"{value:.4g}"
    decimals = max(0, 1 - math.floor(math.log10(err)))
    if decimals > 6:
        return f"{value:.3g}±{err:.1g}"
    return f"{value:.{decimals}f}±{err:.{decimals}f}"


def _print_table(records: list[dict[str, Any]]) -> None:
    from rich.table import Table

    from speccat.cli.common import console, format_cell

    out = console()
    wide = out.width >= 120
    for r in records:
        where = (
            r["file"]
            + (f" [hdu {r['hdu']}]" if r["hdu"] else "")
            + (f" [row {r['row']}]" if r["row"] is not None else "")
        )
        out.print(f"[bold]{r['source'] or '(no OBJECT)'}[/bold]  {where}")
        frame = r["specsys"] or "frame unknown"
        out.print(
            f"  {r['obs_time'] or 'time unknown'} · {r['freq_min_mhz']:.4f}–{r['freq_max_mhz']:.4f} MHz "
            f"({frame}) · {r['channels']} channels of {r['channel_width_khz']:.4g} kHz · "
            f"Stokes {','.join(r['stokes'])} · rms {format_cell(r['rms'])} {r['intensity_unit']}"
            + (f" · flags: {', '.join(r['flags'])}" if r["flags"] else "")
        )
        if not r["lines"]:
            out.print("  no lines above the detection threshold\n")
            continue
        unit = r["intensity_unit"] or "intensity"
        t = Table(show_edge=False, pad_edge=False, box=None, header_style="bold")
        t.add_column("line", no_wrap=True)
        if wide:
            t.add_column("transition", no_wrap=True)
        cols = ["v_LSR km/s", "FWHM km/s", f"peak {unit}"] + ([f"∫ {unit}·km/s"] if wide else [])
        for col in cols:
            t.add_column(col, justify="right", no_wrap=True)
        t.add_column("S/N", justify="right", no_wrap=True, min_width=5)
        t.add_column("score", justify="right", no_wrap=True, min_width=5)
        if wide:
            t.add_column("runner-up", no_wrap=True)
        if wide:
            t.add_column("flags and field", overflow="fold")
        notes = []
        for ln in r["lines"]:
            name = ln["line"] or f"?{ln['obs_freq_mhz']:.3f}"
            extra = list(ln["flags"])
            if ln["b_los_ug"] is not None:
                extra.append(f"B_los {_pm(ln['b_los_ug'], ln['b_los_err_ug'])} µG")
            row = [name]
            if wide:
                row.append(ln["transition"] or "")
            row += [
                _pm(ln["v_lsr_kms"], ln["v_lsr_err_kms"]),
                _pm(ln["fwhm_kms"], ln["fwhm_err_kms"]),
                _pm(ln["peak"], ln["peak_err"]),
                *([_pm(ln["integral"], ln["integral_err"])] if wide else []),
                f"{ln['snr']:.1f}",
                "" if ln["id_score"] is None else f"{ln['id_score']:.2f}",
            ]
            if wide:
                row.append(
                    f"{ln['runner_up']} ({ln['runner_up_score']:.2g})" if ln["runner_up"] else ""
                )
            if wide:
                row.append(", ".join(extra))
            elif extra:
                notes.append(f"  {name}: {', '.join(extra)}")
            t.add_row(*row)
        out.print(t)
        for note in notes:
            out.print(note)
        if not wide:
            out.print(
                "  (? = unidentified, at the observed MHz; wider terminal or --format json: integrals)"
            )
        out.print()


def run(args: argparse.Namespace) -> int:
    from speccat.catalogue import load
    from speccat.errors import SpeccatError
    from speccat.workers import measure_file

    settings = load_settings({"catalogue": args.catalogue, "detect_sigma": args.detect_sigma})
    catalogue = load(settings.catalogue or None)
    records: list[dict[str, Any]] = []
    failed = 0
    for path in args.files:
        try:
            results = measure_file(path, settings, catalogue)
        except SpeccatError as exc:
            print(f"speccat: error: {exc}", file=sys.stderr)
            failed += 1
            continue
        records.extend(spectrum_record(r) for r in results)
    if args.format == "json":
        json.dump(records, sys.stdout, indent=1, allow_nan=False)
        sys.stdout.write("\n")
    else:
        _print_table(records)
    return 1 if failed else 0
