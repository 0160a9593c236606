"""The inspector's numbers: axis conversion, zoom window, value ± error formatting.

The velocity axis is checked against astropy's radio Doppler equivalency
(``astropy.units.doppler_radio``: v = c (f0 - f) / f0, the radio convention of FITS WCS
Paper III, Greisen et al. 2006, A&A 446, 747, Table 1).
"""

from __future__ import annotations

import astropy.units as u
import numpy as np

from speccat.model import C_KMS
from speccat.tui.detail_screen import ZOOM_FWHM, plot_for
from speccat.tui.factsheet import value_pm
from speccat.tui.services import Detail

REST_HZ = 5_008_922_000.0  # a label for the synthetic line, not a check value
FACTOR = 1.0000123  # f_lsrk = f_file * factor (invented)


def _detail(identified: bool = True) -> Detail:
    v_kms = 42.0
    centre_lsrk = REST_HZ * (1 - v_kms / C_KMS)
    freq = np.linspace(centre_lsrk - 4e6, centre_lsrk + 4e6, 2048) / FACTOR
    fwhm_hz = 25.0 / C_KMS * REST_HZ
    y = np.exp(-4 * np.log(2) * ((freq * FACTOR - centre_lsrk) / fwhm_hz) ** 2)
    row = {"line": "H109a" if identified else None, "intensity_unit": "K", "v_lsr_kms": v_kms}
    return Detail(
        row=row,
        freq_hz=freq,
        y=y,
        model=y,
        lsrk_factor=FACTOR,
        rest_hz=REST_HZ if identified else None,
        center_hz=centre_lsrk / FACTOR,
        fwhm_hz=fwhm_hz / FACTOR,
        markers=(("H109a", centre_lsrk / FACTOR),),
        candidates=[],
        derived={},
    )


def test_velocity_axis_matches_astropy_radio_convention() -> None:
    d = _detail()
    data, legend = plot_for(d, velocity_axis=True, zoomed=False)
    ref = (d.freq_hz * FACTOR * u.Hz).to_value(
        u.km / u.s, equivalencies=u.doppler_radio(REST_HZ * u.Hz)
    )
    np.testing.assert_allclose(data.x, ref, rtol=0, atol=1e-9)
    assert data.x_unit == "km/s" and "v_LSRK radio" in legend
    # the identified line's marker sits at the detection's velocity
    assert abs(data.markers[0][0] - 42.0) < 1e-6


def test_frequency_axis_is_the_files_own_in_mhz() -> None:
    d = _detail()
    data, legend = plot_for(d, velocity_axis=False, zoomed=False)
    np.testing.assert_allclose(data.x, d.freq_hz / 1e6)
    assert data.x_unit == "MHz" and "frequency" in legend


def test_zoom_spans_the_line_and_unzoom_the_band() -> None:
    d = _detail()
    data, legend = plot_for(d, velocity_axis=True, zoomed=True)
    lo, hi = data.x_range
    assert abs((lo + hi) / 2 - 42.0) < 0.01
    width_kms = hi - lo
    assert abs(width_kms - 2 * ZOOM_FWHM * 25.0) < 0.05  # ±4 FWHM of a 25 km/s line
    assert "±4 FWHM" in legend
    assert plot_for(d, velocity_axis=True, zoomed=False)[0].x_range is None


def test_unidentified_lines_are_drawn_against_frequency() -> None:
    data, _ = plot_for(_detail(identified=False), velocity_axis=True, zoomed=True)
    assert data.x_unit == "MHz"


def test_no_color_legend_names_the_dashed_fit() -> None:
    _data, legend = plot_for(_detail(), velocity_axis=True, zoomed=True, plain=True)
    assert "dashed" in legend


def test_value_pm_rounds_to_two_significant_digits_of_the_error() -> None:
    # common practice: quote the error to two significant digits, the value to match
    assert value_pm(42.01234, 0.0213, "km/s") == "42.012 ± 0.021 km/s"
    assert value_pm(5.2282, 0.0092) == "5.2282 ± 0.0092"
    assert value_pm(1234.4, 56.0) == "1234 ± 56"
    assert value_pm(None, 1.0) == "—"
    assert value_pm(3.0, None, "K") == "3 K"
