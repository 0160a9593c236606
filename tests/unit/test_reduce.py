"""Unit tests of the reduction engine (speccat.reduce): inputs, baseline, flags, units."""

from __future__ import annotations

import numpy as np
import pytest

from speccat.errors import SpeccatError
from speccat.model import Kind, LineFit
from speccat.reduce import ReduceError, ReduceSettings, line_model, measure

FWHM = 2.0 * np.sqrt(2.0 * np.log(2.0))
DF = 2.0e3  # channel width, Hz


def _axis(n: int = 2048) -> tuple[np.ndarray, np.ndarray]:
    chan = np.arange(n, dtype=float)
    return chan, 1.4e9 + DF * chan


def _gauss(chan: np.ndarray, amp: float, cen: float, fwhm: float) -> np.ndarray:
    return amp * np.exp(-0.5 * ((chan - cen) / (fwhm / FWHM)) ** 2)


@pytest.mark.parametrize(
    ("freq", "data", "words"),
    [
        (np.arange(100.0), np.zeros(99), "must match"),
        (np.arange(100.0)[::-1], np.zeros(100), "ascending"),
        (np.arange(8.0), np.zeros(8), "channels"),
        (np.arange(100.0), np.full(100, np.nan), "finite"),
        (np.zeros((2, 50)), np.zeros((2, 50)), "one-dimensional"),
    ],
)
def test_bad_input_raises_reduce_error(freq, data, words) -> None:
    with pytest.raises(ReduceError, match=words) as info:
        measure(freq, data)
    assert isinstance(info.value, SpeccatError)


def test_bad_settings_raise() -> None:
    with pytest.raises(ReduceError, match="detect_sigma"):
        ReduceSettings(detect_sigma=0.0)
    with pytest.raises(ReduceError, match="profile"):
        ReduceSettings(profile="lorentz")  # type: ignore[arg-type]


def test_noise_only_gives_rms_continuum_and_no_lines(rng: np.random.Generator) -> None:
    chan, freq = _axis()
    m = measure(freq, 7.0 + rng.normal(0.0, 0.5, chan.size), stokes="V")
    assert m.stokes == "V"
    assert m.lines == ()
    assert m.rms == pytest.approx(0.5, rel=0.05)
    assert m.continuum == pytest.approx(7.0, abs=0.05)
    assert m.flags == ()


def test_baseline_model_reproduces_polynomial(rng: np.random.Generator) -> None:
    chan, freq = _axis()
    x = 2 * chan / (chan.size - 1) - 1
    truth = 3.0 + 0.8 * x - 1.5 * x**2 + 0.6 * x**3
    y = truth + rng.normal(0.0, 0.2, chan.size) + _gauss(chan, 4.0, 700.0, 25.0)
    m = measure(freq, y)
    base = m.baseline.evaluate()
    assert base.shape == chan.shape
    assert np.max(np.abs(base - truth)) < 0.1 * 0.2 * 3  # within 0.3 sigma everywhere
    assert 3 <= len(m.baseline.coeffs) - 1 <= 5  # BIC keeps the cubic term, no more than max
    assert m.continuum == pytest.approx(np.median(base))
    forced = measure(freq, y, ReduceSettings(baseline_order=4))
    assert len(forced.baseline.coeffs) == 5


def test_line_values_units_and_integrals(rng: np.random.Generator) -> None:
    chan, freq = _axis()
    y = 1.0 + rng.normal(0.0, 0.1, chan.size) + _gauss(chan, 2.0, 1000.4, 12.0)
    m = measure(freq, y)
    assert len(m.lines) == 1
    ln = m.lines[0]
    assert ln.kind is Kind.EMISSION
    assert ln.center_chan == pytest.approx(1000.4, abs=4 * ln.center_err_hz / DF)
    assert ln.center_hz == pytest.approx(1.4e9 + DF * ln.center_chan, rel=1e-12)
    assert ln.fwhm_hz == pytest.approx(DF * ln.fwhm_chan, rel=1e-12)
    assert ln.fwhm_chan == pytest.approx(12.0, abs=4 * ln.fwhm_err_hz / DF)
    assert ln.peak == pytest.approx(2.0, abs=4 * ln.peak_err)
    assert ln.snr == pytest.approx(abs(ln.peak) / m.rms)
    area = np.sqrt(2 * np.pi) * 2.0 * 12.0 / FWHM * DF  # Gaussian area, common practice
    assert ln.integral_fit_hz == pytest.approx(area, abs=4 * ln.integral_fit_err_hz)
    assert ln.integral_sum_hz == pytest.approx(area, abs=4 * ln.integral_sum_err_hz)
    # the +/-1.5 FWHM window holds 99.96 % of a Gaussian: the sum error is rms*DF*sqrt(N)
    n_win = np.count_nonzero(np.abs(chan - ln.center_chan) <= 1.5 * ln.fwhm_chan)
    assert ln.integral_sum_err_hz == pytest.approx(m.rms * DF * np.sqrt(n_win), rel=0.1)
    assert 0.5 < ln.chi2_red < 1.5
    assert ln.moment1_hz == pytest.approx(ln.center_hz, abs=3 * DF)
    assert ln.moment2_hz == pytest.approx(ln.fwhm_hz / FWHM, rel=0.1)
    assert ln.w50_hz == pytest.approx(ln.fwhm_hz, rel=0.15)
    assert ln.flags == ()


def test_absorption_line(rng: np.random.Generator) -> None:
    chan, freq = _axis()
    y = 20.0 + rng.normal(0.0, 0.1, chan.size) + _gauss(chan, -3.0, 500.0, 30.0)
    (ln,) = measure(freq, y).lines
    assert ln.kind is Kind.ABSORPTION
    assert ln.peak < 0 and ln.integral_fit_hz < 0 and ln.integral_sum_hz < 0
    assert ln.peak == pytest.approx(-3.0, abs=4 * ln.peak_err)


def test_rfi_spike_flagged_maser_not(rng: np.random.Generator) -> None:
    chan, freq = _axis()
    truth = 2.0 + 0.3 * (chan / chan.size)
    y = truth + rng.normal(0.0, 0.1, chan.size) + _gauss(chan, 5.0, 600.0, 4.0)
    y[1500] += 80.0  # a one-channel spike, 800 sigma
    m = measure(freq, y)
    assert len(m.lines) == 2
    maser, spike = sorted(m.lines, key=lambda line: line.center_chan)
    assert "rfi-spike" in spike.flags and "rfi-spike" not in maser.flags
    assert "rfi-spike" in m.flags
    assert spike.peak == pytest.approx(80.0, abs=5 * m.rms)  # unresolved: the channel's value
    assert maser.fwhm_chan == pytest.approx(4.0, rel=0.1)
    # the spike does not drag the baseline: it stays within 0.5 sigma of the truth
    assert np.max(np.abs(m.baseline.evaluate() - truth)) < 0.05


def test_nan_and_clipped_channels_flagged(rng: np.random.Generator) -> None:
    chan, freq = _axis()
    y = rng.normal(0.0, 0.1, chan.size) + _gauss(chan, 2.0, 800.0, 20.0)
    y[795:799] = np.nan
    y += _gauss(chan, 8.0, 1600.0, 40.0)
    y = np.minimum(y, 6.0)  # the recorder saturates: a flat top at the maximum
    m = measure(freq, y)
    assert "nan-channels" in m.flags and "clipped" in m.flags
    by_centre = {round(ln.center_chan / 100): ln for ln in m.lines}
    assert "nan-channels" in by_centre[8].flags
    assert "clipped" in by_centre[16].flags


def test_band_edge_flag(rng: np.random.Generator) -> None:
    chan, freq = _axis()
    y = rng.normal(0.0, 0.1, chan.size) + _gauss(chan, 2.0, 6.0, 10.0)
    (ln,) = measure(freq, y).lines
    assert "band-edge" in ln.flags


def test_blend_split_into_components(rng: np.random.Generator) -> None:
    chan, freq = _axis()
    y = rng.normal(0.0, 0.1, chan.size) + _gauss(chan, 2.0, 1000.0, 20.0)
    y += _gauss(chan, 1.2, 1025.0, 20.0)  # 1.25 FWHM apart: one bump to the eye
    m = measure(freq, y)
    assert len(m.lines) == 2
    a, b = m.lines
    assert a.blend == b.blend and "blended" in a.flags and "blended" in b.flags
    assert a.center_chan == pytest.approx(1000.0, abs=5 * a.center_err_hz / DF)
    assert b.center_chan == pytest.approx(1025.0, abs=5 * b.center_err_hz / DF)
    assert b.peak == pytest.approx(1.2, abs=5 * b.peak_err)


def test_poor_fit_flag_for_a_box_profile(rng: np.random.Generator) -> None:
    chan, freq = _axis()
    y = rng.normal(0.0, 0.1, chan.size)
    y[1000:1060] += 3.0  # flat-topped: no single Gaussian fits it
    m = measure(freq, y, ReduceSettings(max_components=1))
    assert any("poor-fit" in ln.flags for ln in m.lines)
    assert all(ln.chi2_red > 2.0 for ln in m.lines if "poor-fit" in ln.flags)


def test_ripple_flag_and_no_ripple_on_noise(rng: np.random.Generator) -> None:
    chan, freq = _axis()
    y = rng.normal(0.0, 0.1, chan.size) + 0.1 * np.sin(2 * np.pi * chan / 160.0)
    m = measure(freq, y)
    assert "baseline-ripple" in m.flags
    assert m.baseline.ripple_period_chan == pytest.approx(160.0, rel=0.01)
    assert m.baseline.ripple_amp == pytest.approx(0.1, rel=0.1)
    assert m.lines == ()
    plain = measure(freq, rng.normal(0.0, 0.1, chan.size))
    assert "baseline-ripple" not in plain.flags and plain.baseline.ripple_amp == 0.0


def test_correlated_noise_is_not_mistaken_for_lines(rng: np.random.Generator) -> None:
    """Hanning-smoothed noise (rho(1) = 2/3): filtered sigma accounts for the correlation."""
    chan, freq = _axis()
    found = 0
    for _ in range(15):
        white = rng.normal(0.0, 1.0, chan.size + 2)
        smooth = 0.25 * white[:-2] + 0.5 * white[1:-1] + 0.25 * white[2:]
        found += len(measure(freq, smooth).lines)
    assert found <= 1


def test_line_model_matches_fit(rng: np.random.Generator) -> None:
    chan, freq = _axis()
    y = rng.normal(0.0, 0.05, chan.size) + _gauss(chan, 2.0, 900.0, 16.0)
    m = measure(freq, y)
    model = line_model(freq, m.lines)
    assert model.shape == freq.shape
    assert np.max(np.abs(y - m.baseline.evaluate() - model)) < 6 * m.rms
    ln = m.lines[0]
    assert model[round(ln.center_chan)] == pytest.approx(ln.peak, rel=0.01)
    fake = LineFit(
        center_hz=1.4e9 + 500 * DF, center_err_hz=1.0, peak=-1.0, peak_err=0.1,
        fwhm_hz=20 * DF, fwhm_err_hz=1.0, integral_fit_hz=0.0, integral_fit_err_hz=0.0,
        integral_sum_hz=0.0, integral_sum_err_hz=0.0, center_chan=500.0, fwhm_chan=20.0,
        snr=10.0, chi2_red=1.0, kind=Kind.ABSORPTION, profile="voigt",
        lorentz_fwhm_hz=8 * DF,
    )  # fmt: skip
    fine = 1.4e9 + DF * np.arange(400.0, 600.0, 0.01)
    voigt = line_model(fine, [fake])
    assert voigt.min() == pytest.approx(-1.0, rel=1e-3)
    half = fine[voigt <= -0.5]
    assert (half[-1] - half[0]) / DF == pytest.approx(20.0, abs=0.05)


@pytest.mark.parametrize(
    "kind", ["zeros", "constant", "inf-channel", "quantised", "short", "huge", "half-nan"]
)
def test_awkward_inputs_measure_cleanly(rng: np.random.Generator, kind: str) -> None:
    chan, freq = _axis(1024)
    y = {
        "zeros": np.zeros(chan.size),
        "constant": np.full(chan.size, 5.0),
        "inf-channel": np.where(chan == 100, np.inf, rng.normal(0.0, 1.0, chan.size)),
        "quantised": np.round(rng.normal(0.0, 1.0, chan.size)),
        "short": rng.normal(0.0, 1.0, chan.size),
        "huge": rng.normal(0.0, 1.0, chan.size) * 1e30,
        "half-nan": np.where(chan % 2 == 0, np.nan, rng.normal(0.0, 1.0, chan.size)),
    }[kind]
    if kind == "short":
        y, freq = y[:16], freq[:16]
    m = measure(freq, y)
    assert np.isfinite(m.rms) and m.rms >= 0 and np.isfinite(m.continuum)
    assert m.lines == ()
    assert ("nan-channels" in m.flags) == (kind in ("inf-channel", "half-nan"))
    assert "clipped" not in m.flags
    if kind == "quantised":
        # rounding to integers adds 1/12 to the variance (Sheppard's correction, common practice)
        assert m.rms == pytest.approx(np.sqrt(1 + 1 / 12), rel=0.06)


def test_heavy_tailed_noise_is_bounded_and_work_counter_reset(rng: np.random.Generator) -> None:
    """Cauchy noise: every spike is 'significant'; the per-call work budget keeps it bounded."""
    from speccat.reduce.fit import WORK

    chan, freq = _axis(1024)
    m = measure(freq, rng.standard_cauchy(chan.size), ReduceSettings(max_lines=20))
    assert len(m.lines) <= 20
    assert all(np.isfinite(ln.center_hz) and np.isfinite(ln.peak) for ln in m.lines)
    assert WORK.get() is None  # measure() leaves no state behind


@pytest.mark.parametrize("rows", [1, 3])
def test_direct_minpack_call_equals_scipy_leastsq(
    rng: np.random.Generator, monkeypatch: pytest.MonkeyPatch, rows: int
) -> None:
    # fit_components calls MINPACK's lmder directly; SciPy's leastsq (the fall-back) runs the
    # same routine, so both give the same fit to the last bit
    from speccat.reduce import fit

    x = np.arange(120.0)
    truth = [(5.0, 40.3, 4.0), (-2.0, 60.7, 6.0), (3.0, 80.2, 2.5)][:rows]
    y = sum(_gauss(x, a, c, w * FWHM) for a, c, w in truth) + rng.normal(0.0, 0.3, x.size)
    p0 = np.array([[a * 0.8, c - 0.7, np.log(w * 1.2)] for a, c, w in truth])
    direct = fit.fit_components(x, y, p0, "gaussian")
    monkeypatch.setattr(fit, "_scipy_lmder", None)
    through_leastsq = fit.fit_components(x, y, p0, "gaussian")
    assert direct.success and through_leastsq.success
    assert np.array_equal(direct.params, through_leastsq.params)
    assert np.array_equal(direct.cov, through_leastsq.cov)
