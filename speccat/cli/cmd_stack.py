"""``speccat stack --source NAME``: stack a source's recombination lines from the archive."""

from __future__ import annotations

import argparse
import json
import math
import sys
from typing import Any

from speccat.config import load_settings

NAME = "stack"
HELP = "average a source's recombination lines (1/rms^2 weights) and measure the stack"
ORDER = 35

DETECTION_COLUMNS = (
    "line",
    "v_lsr_kms",
    "v_lsr_err_kms",
    "fwhm_kms",
    "fwhm_err_kms",
    "peak",
    "peak_err",
    "snr",
    "kind",
)


def add_arguments(parser: argparse.ArgumentParser) -> None:
    from speccat.cli.common import add_format_argument

    parser.add_argument("--source", required=True, metavar="NAME", help="the source to stack")
    parser.add_argument(
        "--species", default="H", metavar="NAME", help="element of the lines (default H)"
    )
    parser.add_argument(
        "--line", metavar="GLOB", help="line-name glob, e.g. 'H1??a' (default: every alpha line)"
    )
    parser.add_argument(
        "--dn", type=int, metavar="N", help="only lines with this Δn (default 1 without --line)"
    )
    parser.add_argument(
        "--window",
        type=float,
        default=300.0,
        metavar="KMS",
        help="half-width of each segment around the source velocity, km/s (default 300)",
    )
    parser.add_argument(
        "--channel",
        type=float,
        metavar="KMS",
        help="channel width of the stack, km/s (default: the coarsest segment's)",
    )
    parser.add_argument(
        "--store", action="store_true", help="store the stacked spectrum in the archive"
    )
    parser.add_argument(
        "--night", metavar="LABEL", help="night of the stored stack (default: latest input's)"
    )
    add_format_argument(parser, ("table", "json"))


def _detection(det: Any) -> dict[str, Any]:
    return {
        "line": None if det.line is None else det.line.name,
        "v_lsr_kms": det.v_lsr_kms,
        "v_lsr_err_kms": det.v_lsr_err_kms,
        "fwhm_kms": det.fwhm_kms,
        "fwhm_err_kms": det.fwhm_err_kms,
        "peak": det.fit.peak,
        "peak_err": det.fit.peak_err,
        "snr": det.fit.snr,
        "kind": str(det.fit.kind),
    }


def _segment(s: Any) -> dict[str, Any]:
    keys = ("detection_id", "spectrum_id", "line", "rms", "snr", "v_lsr_kms")
    return {k: getattr(s, k) for k in keys}


def _clean(value: Any) -> Any:
    return None if isinstance(value, float) and not math.isfinite(value) else value


def summary(outcome: Any, stored: bool | None) -> dict[str, Any]:
    """The JSON document of a stack: inputs, measurement, gain over the best single line."""
    main = outcome.main_detection()
    stack_snr = None if main is None else float(main.fit.snr)
    best = outcome.best_single_snr
    return {
        "source": outcome.source,
        "species": outcome.species,
        "reference_line": outcome.reference_line,
        "rest_freq_mhz": outcome.result.spectrum.rest_freq_hz / 1e6,
        "file": outcome.label(),
        "n_segments": len(outcome.segments),
        "segments": [_segment(s) for s in outcome.segments],
        "skipped": [{"detection_id": d, "reason": why} for d, why in outcome.skipped],
        "rms": _clean(float(outcome.result.measurement.rms)),
        "best_single_snr": best,
        "stack_snr": stack_snr,
        "snr_gain": None if stack_snr is None or best <= 0 else stack_snr / best,
        "sqrt_n": math.sqrt(len(outcome.segments)),
        "detections": [
            {k: _clean(v) for k, v in _detection(d).items()} for d in outcome.result.detections
        ],
        "stored": stored,
        "night": outcome.night,
    }


def run(args: argparse.Namespace) -> int:
    from speccat.archive import Archive
    from speccat.archive.filters import check_text
    from speccat.cli.common import console, write_records
    from speccat.stacking import StackError, stack_source, store_stack

    source = check_text(args.source, "--source")
    dn = args.dn if args.dn is not None else (None if args.line else 1)
    if dn is not None and dn < 1:
        raise StackError("--dn must be at least 1")
    if args.night is not None and not 0 < len(args.night.strip()) <= 100:
        raise StackError("--night must be 1 to 100 characters")
    settings = load_settings({"archive": args.archive})
    with Archive.open(settings.archive, readonly=not args.store) as archive:
        outcome = stack_source(
            archive,
            source,
            species=args.species,
            line_glob=args.line,
            dn=dn,
            window_kms=args.window,
            channel_kms=args.channel,
            detect_sigma=settings.detect_sigma,
        )
        stored = store_stack(archive, outcome, args.night) if args.store else None
    doc = summary(outcome, stored)
    if args.format == "json":
        json.dump(doc, sys.stdout, indent=1, allow_nan=False)
        sys.stdout.write("\n")
        return 0
    out = console()
    lines = ", ".join(f"{s['line']}#{s['detection_id']}" for s in doc["segments"])
    out.print(f"stack of {doc['n_segments']} lines of {doc['source']}: {lines}")
    out.print(f"reference {doc['reference_line']} ({doc['rest_freq_mhz']:.6f} MHz), LSRK radio")
    for item in doc["skipped"]:
        out.print(f"left out detection {item['detection_id']}: {item['reason']}")
    write_records(doc["detections"], DETECTION_COLUMNS, "table", title="stacked spectrum")
    if doc["stack_snr"] is not None:
        out.print(
            f"S/N {doc['stack_snr']:.1f} (best single line {doc['best_single_snr']:.1f}, "
            f"gain {doc['snr_gain']:.2f}, sqrt(N) = {doc['sqrt_n']:.2f})"
        )
    if stored is not None:
        verb = "stored as" if stored else "already archived:"
        out.print(f"{verb} {doc['file']} (night {args.night or doc['night']})")
    return 0
