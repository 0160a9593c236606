"""Unit tests of speccat.identify with a small fake catalogue and hand-made line fits.

The catalogue lines here are fakes for exercising the algorithm (their frequencies only need to
be self-consistent); the end-to-end checks against the real catalogue live in
tests/reference/test_identify_night.py.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pytest

from speccat.identify import MAX_CANDIDATES, identify
from speccat.model import C_KMS, BaselineModel, Kind, LineFit, Measurement, Origin, Spectrum


@dataclass(frozen=True)
class FakeLine:
    name: str
    species: str
    rest_freq_hz: float
    line_class: str
    prior: float
    width_min_kms: float
    width_max_kms: float
    group: str = ""
    transition: str = ""
    rest_freq_err_hz: float = 0.0


class FakeCatalogue:
    def __init__(self, lines: list[FakeLine]) -> None:
        self.lines = sorted(lines, key=lambda ln: ln.rest_freq_hz)

    def between(self, fmin_hz: float, fmax_hz: float) -> list[FakeLine]:
        return [ln for ln in self.lines if fmin_hz <= ln.rest_freq_hz <= fmax_hz]


def _shift(f0: float, v_kms: float) -> float:
    """Rest frequency of a line that sits v_kms (radio) away from f0."""
    return f0 / (1.0 - v_kms / C_KMS)


H_REST = 5_008.9e6
CAT = FakeCatalogue(
    [
        FakeLine("H109a", "H", H_REST, "recombination", 0.9, 12, 60, "RRL 109 a"),
        FakeLine("He109a", "He", _shift(H_REST, 122.2), "recombination", 0.3, 8, 45, "RRL 109 a"),
        FakeLine("C109a", "C", _shift(H_REST, 149.6), "recombination", 0.2, 1, 15, "RRL 109 a"),
        FakeLine("HI", "HI", 1_420.4e6, "atomic", 0.9, 1, 120, ""),
        FakeLine("OH1665", "OH", 1_665.4e6, "maser", 0.6, 0.1, 60, "OH 18cm"),
        FakeLine("OH1667", "OH", 1_667.4e6, "maser", 0.7, 0.1, 60, "OH 18cm"),
        FakeLine("H2O22", "H2O", 22_235.0e6, "maser", 0.7, 0.1, 5, ""),
        FakeLine("NH3(1,1)", "NH3", 23_694.5e6, "thermal", 0.6, 0.3, 5, "NH3(1,1)"),
        FakeLine(
            "NH3(1,1)o-", "NH3", _shift(23_694.5e6, -19.4), "thermal", 0.3, 0.3, 5, "NH3(1,1)"
        ),
        FakeLine("NH3(1,1)o+", "NH3", _shift(23_694.5e6, 19.4), "thermal", 0.3, 0.3, 5, "NH3(1,1)"),
        # a fake thermal line 25 km/s above the main NH3 line, the confusion a satellite risks
        FakeLine("X23", "X", _shift(23_694.5e6, 25.0), "thermal", 0.5, 0.3, 8, ""),
        # a fake line 300 km/s below H109a (an unrelated thermal molecule)
        FakeLine("Y5", "Y", _shift(H_REST, -300.0), "thermal", 0.4, 0.5, 8, ""),
    ]
)


def _rest(name: str) -> float:
    return next(ln.rest_freq_hz for ln in CAT.lines if ln.name == name)


def _fit(f0: float, v_kms: float, fwhm_kms: float, snr: float = 20.0, chan_kms: float = 0.5,
         kind: Kind = Kind.EMISSION) -> LineFit:  # fmt: skip
    """A LineFit for a line of rest frequency f0 at radio velocity v_kms (exact centre)."""
    f = f0 * (1.0 - v_kms / C_KMS)
    fwhm_hz = fwhm_kms * f0 / C_KMS
    err = 0.6 * fwhm_hz / snr
    peak = snr * (1 if kind is Kind.EMISSION else -1)
    area = 1.064 * peak * fwhm_hz
    return LineFit(
        center_hz=f, center_err_hz=err, peak=peak, peak_err=1.0, fwhm_hz=fwhm_hz,
        fwhm_err_hz=1.4 * err, integral_fit_hz=area, integral_fit_err_hz=abs(area) / snr,
        integral_sum_hz=area, integral_sum_err_hz=abs(area) / snr, center_chan=0.0,
        fwhm_chan=fwhm_kms / chan_kms, snr=snr, chi2_red=1.0, kind=kind,
    )  # fmt: skip


def _spectrum(fmin: float, fmax: float, specsys: str = "LSRK", source: str = "SRC-A",
              z: float | None = None) -> Spectrum:  # fmt: skip
    freq = np.linspace(fmin, fmax, 64)
    return Spectrum(freq_hz=freq, intensity={"I": np.zeros(64)}, intensity_unit="K",
                    source=source, origin=Origin("fake.fits"), specsys=specsys, z_source=z)  # fmt: skip


def _run(fits: list[LineFit], spec: Spectrum | None = None, **kw: object):  # type: ignore[no-untyped-def]
    if spec is None:
        centres = [f.center_hz for f in fits]
        spec = _spectrum(min(centres) * 0.995, max(centres) * 1.005)
    meas = Measurement("I", 1.0, 0.0, BaselineModel(spec.n_channels, (0.0,)), tuple(fits))
    return identify(spec, meas, CAT, **kw)  # type: ignore[arg-type]


def _names(result) -> list[str | None]:  # type: ignore[no-untyped-def]
    return [d.line.name if d.line else None for d in result.detections]


def test_lone_hydrogen_line_is_hydrogen_with_velocity() -> None:
    res = _run([_fit(H_REST, 35.0, 25.0)])
    det = res.detections[0]
    assert det.line is not None and det.line.name == "H109a"
    assert det.v_lsr_kms == pytest.approx(35.0, abs=1e-6)
    assert det.fwhm_kms == pytest.approx(25.0, rel=1e-6)
    assert det.v_lsr_err_kms == pytest.approx(0.6 * 25.0 / 20.0, rel=1e-6)
    names = [c.name for c in det.candidates]
    assert "He109a" in names and len(names) <= MAX_CANDIDATES
    scores = [c.score for c in det.candidates]
    assert scores == sorted(scores, reverse=True) and 0.0 < sum(scores) <= 1.0 + 1e-12


def test_h_and_he_in_one_window() -> None:
    res = _run([_fit(H_REST, -20.0, 28.0, snr=40), _fit(_rest("He109a"), -20.0, 20.0, snr=6)])
    assert sorted(map(str, _names(res))) == ["H109a", "He109a"]
    for det in res.detections:
        assert det.v_lsr_kms == pytest.approx(-20.0, abs=1e-6)


def test_h_he_c_triplet() -> None:
    he, c = _rest("He109a"), _rest("C109a")
    fits = [_fit(H_REST, 10.0, 30.0, snr=50), _fit(he, 10.0, 22.0, 8), _fit(c, 10.5, 5.0, 6)]
    assert sorted(map(str, _names(_run(fits)))) == ["C109a", "H109a", "He109a"]


def test_lone_narrow_line_at_rrl_frequency_is_not_forced() -> None:
    """A 0.3 km/s spike where only broad recombination lines could be: unidentified."""
    res = _run([_fit(H_REST, 5.0, 0.3, chan_kms=0.05)])
    det = res.detections[0]
    assert det.line is None and det.v_lsr_kms is None
    assert det.candidates  # still ranked, for the record


def test_no_candidates_far_from_catalogue() -> None:
    res = _run([_fit(3_000.0e6, 0.0, 10.0)])
    det = res.detections[0]
    assert det.line is None and det.candidates == ()
    # km/s widths fall back to the observed centre
    assert det.fwhm_kms == pytest.approx(10.0, rel=1e-3)


def test_lone_narrow_maser() -> None:
    res = _run([_fit(22_235.0e6, -42.0, 0.8, snr=200, chan_kms=0.2)])
    assert _names(res) == ["H2O22"]
    assert res.detections[0].line.score > 0.9  # type: ignore[union-attr]


def test_maser_spikes_of_one_species() -> None:
    fits = [
        _fit(22_235.0e6, v, 0.6, snr=s, chan_kms=0.2) for v, s in [(-60, 30), (-45, 300), (-20, 12)]
    ]
    assert _names(_run(fits)) == ["H2O22"] * 3


def test_nh3_satellites_not_mistaken() -> None:
    f0 = 23_694.5e6
    sat_minus, sat_plus = _rest("NH3(1,1)o-"), _rest("NH3(1,1)o+")
    fits = [_fit(f0, 6.0, 1.5, 40), _fit(sat_minus, 6.0, 1.5, 12), _fit(sat_plus, 6.0, 1.5, 12)]
    names = _names(_run(fits))
    assert names == ["NH3(1,1)", "NH3(1,1)o-", "NH3(1,1)o+"]


def test_lone_satellite_like_feature_prefers_other_species_when_main_missing() -> None:
    """The missing-companion term: a satellite needs its main line when it is in the band."""
    sat_plus = _rest("NH3(1,1)o+")
    spec = _spectrum(23_690e6, 23_700e6)
    res = _run([_fit(sat_plus, 0.0, 1.5, 12)], spec)
    assert res.detections[0].line is not None
    assert res.detections[0].line.name != "NH3(1,1)o+"


def test_oh_pair_at_one_velocity() -> None:
    fits = [_fit(1_665.4e6, 12.0, 3.0, 15, kind=Kind.ABSORPTION),
            _fit(1_667.4e6, 12.0, 3.0, 25, kind=Kind.ABSORPTION)]  # fmt: skip
    assert _names(_run(fits)) == ["OH1665", "OH1667"]


def test_known_velocity_flips_ambiguous_identification() -> None:
    """A lone 10 km/s line that is H109a at +60 km/s or the fake Y5 line at -240 km/s.

    Without history H109a wins (a Galactic velocity near zero is likelier); an archive velocity
    of -240 km/s for the source makes the Y5 reading the better one.
    """
    fit = _fit(_rest("Y5"), -240.0, 10.0, 30)
    plain = _run([fit]).detections[0]
    assert plain.line is not None and plain.line.name == "H109a"
    assert plain.v_lsr_kms == pytest.approx(60.0, abs=0.1)  # radio velocities add only to O(v²/c)
    known = _run([fit], known_velocities={"SRC-A": -240.0}).detections[0]
    assert known.line is not None and known.line.name == "Y5"
    assert known.v_lsr_kms == pytest.approx(-240.0, abs=1e-6)
    other = _run([fit], known_velocities={"SRC-B": -240.0}).detections[0]
    assert other.line is not None and other.line.name == "H109a"


def test_galaxy_profile_far_away_is_hi_even_near_rrl() -> None:
    f_rrl = 1_399.4e6
    cat = FakeCatalogue([*CAT.lines, FakeLine("H167a", "H", f_rrl, "recombination", 0.9, 12, 60)])
    cz = C_KMS * (1 - (f_rrl * (1 - 40 / C_KMS)) / 1_420.4e6)  # lands 40 km/s from the RRL
    fit = _fit(1_420.4e6, cz, 320.0, snr=15, chan_kms=5.0)
    spec = _spectrum(1_390e6, 1_410e6)
    meas = Measurement("I", 1.0, 0.0, BaselineModel(64, (0.0,)), (fit,))
    det = identify(spec, meas, cat).detections[0]  # type: ignore[arg-type]
    assert det.line is not None and det.line.name == "HI"
    assert det.v_lsr_kms == pytest.approx(cz, abs=1e-6)
    assert cz > 4000


def test_header_redshift_opens_extragalactic_window() -> None:
    z = 0.01
    v_radio = C_KMS * z / (1 + z)
    fit = _fit(1_667.4e6, v_radio + 30.0, 40.0, snr=10)
    assert _names(_run([fit])) == [None]
    spec = _spectrum(fit.center_hz * 0.99, fit.center_hz * 1.01, z=z)
    res = _run([fit], spec)
    assert _names(res) == ["OH1667"]


def test_frame_unknown_is_flagged_on_every_detection() -> None:
    fits = [_fit(H_REST, 0.0, 25.0), _fit(3_000e6, 0.0, 10.0)]
    spec = _spectrum(2_990e6, 5_100e6, specsys="")
    res = _run(fits, spec)
    assert res.frame_flag == "frame-unknown" and res.lsrk_factor == 1.0
    assert all("frame-unknown" in d.flags for d in res.detections)
    assert res.detections[0].v_lsr_kms == pytest.approx(0.0, abs=1e-6)


def test_absorption_rrl_is_disfavoured() -> None:
    res = _run([_fit(H_REST, 0.0, 25.0, kind=Kind.ABSORPTION)])
    emis = _run([_fit(H_REST, 0.0, 25.0)])
    assert res.detections[0].candidates[0].score < emis.detections[0].candidates[0].score


def test_threshold_leaves_weak_identifications_unassigned() -> None:
    fit = _fit(H_REST, 35.0, 25.0)
    assert _names(_run([fit], threshold=1.01)) == [None]


def test_empty_measurement() -> None:
    spec = _spectrum(1e9, 2e9)
    meas = Measurement("I", 1.0, 0.0, BaselineModel(64, (0.0,)), ())
    assert identify(spec, meas, CAT).detections == ()  # type: ignore[arg-type]


# --------------------------------------------------------------------------- scoring terms


def test_width_plausibility_inside_outside_and_unresolved() -> None:
    from speccat.identify.terms import log_width_plausibility

    w = np.array([20.0, 5.0, 200.0, 0.5, 200.0])
    lo, hi = np.full(5, 10.0), np.full(5, 50.0)
    resolved = np.array([True, True, True, False, False])
    out = log_width_plausibility(w, lo, hi, resolved, np.zeros(5))
    assert out[0] == 0.0  # inside the range
    assert out[1] < -1.0 and out[2] < -1.0  # a factor 2 or 4 outside: strongly penalised
    assert out[2] < out[1]  # further outside in log width: worse
    assert out[3] < -1.0  # unresolved but still narrower than the narrowest plausible width
    assert out[4] == 0.0  # unresolved: 200 is only an upper bound on the true width
    looser = log_width_plausibility(w, lo, hi, resolved, np.full(5, 0.5))
    assert looser[1] > out[1]  # an uncertain width is penalised less


def test_background_and_systemic_densities() -> None:
    from speccat.identify.terms import background_density, systemic_density

    v = np.array([0.0, 150.0, 450.0, 5000.0])
    bg = background_density(v, np.array([False, False, False, True]), 400.0)
    assert bg[0] > bg[1] > bg[2]  # Galactic velocities near zero are likeliest
    assert bg[3] > bg[2]  # a wide HI profile may well be a galaxy
    spread = np.full(4, 5.0)
    known = systemic_density(v, spread, bg, (150.0, 8.0))
    assert known[1] > 10 * bg[1] and known[0] < bg[0]
    assert np.array_equal(systemic_density(v, spread, bg, None), bg)


def test_scores_are_probabilities_with_a_none_alternative() -> None:
    """All candidates (not only the five kept) and "none of these" sum to one per detection."""
    from speccat.identify.candidates import candidate_pairs, catalogue_arrays, features, spreads
    from speccat.identify.joint import joint_scores
    from speccat.identify.terms import background_density

    fits = [_fit(H_REST, 10.0, 25.0), _fit(_rest("He109a"), 10.0, 20.0, 6), _fit(3e9, 0, 5.0)]
    feats = features(fits, 1.0)
    pairs = candidate_pairs(feats, catalogue_arrays(CAT), 400.0, None)  # type: ignore[arg-type]
    _class_spread, spread = spreads(pairs, feats)
    bg = background_density(pairs.v_kms, pairs.galaxy, 400.0)
    base = np.zeros(pairs.idx.size)
    p_pair, p_none = joint_scores(pairs, base, spread, bg, np.log(bg), 3, np.full(3, -11.5))
    totals = np.bincount(pairs.det, weights=p_pair, minlength=3) + p_none
    assert np.allclose(totals, 1.0)
    assert p_none[2] == pytest.approx(1.0)  # no candidate at all: certainly none of these


def test_header_redshift_galaxy_profile_fragment() -> None:
    """A reducer may split a galaxy's double-horned profile: a 120 km/s wide piece 150 km/s from
    the header's systemic velocity is still the galaxy's HI."""
    z = 0.015
    v_sys = C_KMS * z / (1 + z)
    fit = _fit(1_420.4e6, v_sys + 150.0, 120.0, snr=8, chan_kms=5.0)
    spec = _spectrum(fit.center_hz * 0.995, fit.center_hz * 1.005, z=z)
    det = _run([fit], spec).detections[0]
    assert det.line is not None and det.line.name == "HI"
    assert det.v_lsr_kms == pytest.approx(v_sys + 150.0, abs=1e-6)


def test_frame_correction_applied_to_velocity_and_width() -> None:
    """A barycentric header: the LSRK factor from speccat.physics.doppler moves the centre."""
    from datetime import UTC, datetime

    spec = _spectrum(22_200e6, 22_260e6, specsys="BARYCENT")
    spec = Spectrum(freq_hz=spec.freq_hz, intensity=spec.intensity, intensity_unit="K",
                    source="SRC-A", origin=Origin("fake.fits"), ra_deg=270.0, dec_deg=30.0,
                    obs_time=datetime(2026, 1, 1, tzinfo=UTC), specsys="BARYCENT")  # fmt: skip
    fit = _fit(22_235.0e6, -30.0, 1.0, snr=100, chan_kms=0.1)
    res = _run([fit], spec)
    factor = res.lsrk_factor
    assert abs(factor - 1.0) * C_KMS > 5.0 and res.frame_flag is None
    det = res.detections[0]
    assert det.line is not None and det.line.name == "H2O22"
    expected = C_KMS * (1 - fit.center_hz * factor / 22_235.0e6)  # radio convention, LSRK
    assert det.v_lsr_kms == pytest.approx(expected, abs=1e-9)
    assert det.fwhm_kms == pytest.approx(fit.fwhm_hz * factor * C_KMS / 22_235.0e6, rel=1e-12)


def test_rfi_flag_weakens_but_does_not_veto_a_maser() -> None:
    from dataclasses import replace

    fit = _fit(22_235.0e6, 12.0, 0.5, snr=300, chan_kms=0.5)
    plain = _run([fit]).detections[0]
    flagged = _run([replace(fit, flags=("rfi-spike",))]).detections[0]
    assert plain.line is not None and flagged.line is not None
    assert flagged.line.name == "H2O22" and "rfi-spike" in flagged.flags
    assert flagged.line.score < plain.line.score


def test_narrow_carbon_line_judged_by_its_fwhm_not_a_blended_w50() -> None:
    """A C line on the wing of the He line: the reducer's W50 may take in the neighbour, but the
    width plausibility uses the fitted FWHM (W50 only serves galaxy profiles)."""
    from dataclasses import replace

    c_fit = _fit(_rest("C109a"), 10.0, 5.0, snr=8)
    c_fit = replace(c_fit, w50_hz=25.0 * _rest("C109a") / C_KMS)
    fits = [_fit(H_REST, 10.0, 28.0, snr=60), _fit(_rest("He109a"), 10.0, 22.0, snr=8), c_fit]
    assert _names(_run(fits)) == ["H109a", "He109a", "C109a"]


def test_unusable_fits_stay_unidentified() -> None:
    """A fit with a NaN or non-positive centre has no candidates; nothing raises."""
    from dataclasses import replace

    good = _fit(H_REST, 0.0, 25.0)
    fits = [replace(good, center_hz=float("nan")), replace(good, center_hz=-1.0), good]
    res = _run(fits, _spectrum(4.9e9, 5.1e9))
    assert _names(res) == [None, None, "H109a"]
    assert res.detections[0].candidates == () and res.detections[1].candidates == ()
