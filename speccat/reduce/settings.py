"""Settings of the reduction engine and its error type."""

from __future__ import annotations

from dataclasses import dataclass
from typing import Literal

from speccat.errors import SpeccatError


class ReduceError(SpeccatError):
    """The arrays handed to the reduction cannot be measured (shape, order, no valid data)."""


@dataclass(frozen=True)
class ReduceSettings:
    """How a spectrum is reduced.

    ``detect_sigma`` is the line-finding threshold in sigma of each matched-filtered spectrum
    (Gaussian kernels, FWHM from ``min_kernel_fwhm_chan`` = 1.5 channels up to a quarter of the
    band in steps of 2, both signs; each filtered sigma from the kernel norm and the measured
    channel correlation). With the default 5.3, pure white noise gives about 0.002 false lines
    per 8,192-channel spectrum (measured: 9 in 4,000 spectra, two seeds; the bound we hold is
    0.01; at 5.0 it was 0.013, 20 in 1,500). A Gaussian line whose peak is 5 times the
    per-channel rms (what "a 5-sigma line" means here) is found in 98.5-99.5 % of trials at
    FWHM 3 channels and in 100 % at FWHM 5, 10, 20, 50 and 100 channels (two runs of 200
    trials per width); the checks are in tests/reference/test_reduce_detection.py.

    ``max_baseline_order`` bounds the polynomial order chosen by the Bayesian information
    criterion (``baseline_order`` forces one order instead). ``profile`` is the line shape;
    ``"voigt"`` adds a Lorentzian width for pressure-broadened recombination lines.
    ``max_components`` bounds the components fitted jointly in one blend, ``max_lines`` the
    lines kept per spectrum (strongest first), ``max_rounds`` the find-fit-look-again rounds.
    A line narrower than ``rfi_max_fwhm_chan`` channels with peak S/N above ``rfi_min_snr`` is
    flagged ``rfi-spike``; a group whose reduced chi^2 exceeds ``poor_fit_chi2`` (and its
    5-sigma statistical range) is flagged ``poor-fit``. Lines are masked out of the baseline
    over +/- ``mask_dilate_fwhm`` FWHM; direct sums run over +/- ``sum_window_fwhm`` FWHM.
    ``ripple`` enables the standing-wave search; ``ripple_false_alarm`` is the chance that pure
    noise fakes one.
    """

    detect_sigma: float = 5.3
    max_baseline_order: int = 5
    baseline_order: int | None = None
    profile: Literal["gaussian", "voigt"] = "gaussian"
    max_components: int = 6
    max_lines: int = 64
    ladder_step: float = 2.0
    min_kernel_fwhm_chan: float = 1.5
    max_kernel_fraction: float = 0.25
    clip_sigma: float = 3.0
    mask_dilate_fwhm: float = 2.0
    sum_window_fwhm: float = 1.5
    ripple: bool = True
    ripple_false_alarm: float = 1e-3
    rfi_max_fwhm_chan: float = 2.0
    rfi_min_snr: float = 10.0
    poor_fit_chi2: float = 2.0
    max_rounds: int = 3

    def __post_init__(self) -> None:
        checks = [
            (self.detect_sigma > 0, "detect_sigma must be positive"),
            (0 <= self.max_baseline_order <= 12, "max_baseline_order must be within 0..12"),
            (
                self.baseline_order is None or 0 <= self.baseline_order <= 12,
                "baseline_order must be within 0..12",
            ),
            (self.profile in ("gaussian", "voigt"), "profile must be 'gaussian' or 'voigt'"),
            (self.max_components >= 1, "max_components must be at least 1"),
            (self.max_lines >= 0, "max_lines must not be negative"),
            (self.ladder_step > 1.05, "ladder_step must exceed 1.05"),
            (self.min_kernel_fwhm_chan > 0, "min_kernel_fwhm_chan must be positive"),
            (0 < self.max_kernel_fraction <= 1, "max_kernel_fraction must be within (0, 1]"),
            (self.clip_sigma > 1, "clip_sigma must exceed 1"),
            (self.max_rounds >= 1, "max_rounds must be at least 1"),
        ]
        for ok, message in checks:
            if not ok:
                raise ReduceError(f"reduce settings: {message}")
