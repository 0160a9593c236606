"""``speccat calc``: JSON keys as issue 9 names them, table output, one-line errors (exit 1)."""

from __future__ import annotations

import json

import pytest

from speccat.cli import main


def _json(capsys: pytest.CaptureFixture[str], *argv: str) -> dict:
    assert main(["calc", *argv, "--format", "json"]) == 0
    return json.loads(capsys.readouterr().out)


def test_distance_json(capsys: pytest.CaptureFixture[str]) -> None:
    out = _json(capsys, "distance", "--l", "30", "--b", "0", "--vlsr", "50", "--curve", "iau1985")
    for key in ("near_kpc", "far_kpc", "tangent_kpc", "tangent_vlsr_kms", "r_gal_kpc", "status"):
        assert key in out
    # Flat curve, b = 0 (IAU 1985): R = R0 Θ0 sin l / (Θ0 sin l + v), closed form.
    r = 8.5 * 220 * 0.5 / (220 * 0.5 + 50)
    assert out["r_gal_kpc"] == pytest.approx(r)
    assert out["status"] == "ok" and out["near_err_kpc"] > 0
    beyond = _json(capsys, "distance", "--l", "30", "--vlsr", "400")
    assert beyond["status"] == "beyond-tangent" and beyond["near_kpc"] is None


def test_te_hi_and_mass_json(capsys: pytest.CaptureFixture[str]) -> None:
    te = _json(capsys, "te", "--freq", "5.0089", "--line-to-continuum", "0.08", "--fwhm", "25",
               "--y", "0.07")  # fmt: skip
    assert te["te_k"] == pytest.approx((7103.3 * 5.0089**1.1 / 0.08 / 25 / 1.07) ** 0.87)
    te_mhz = _json(capsys, "te", "--freq", "5008.9MHz", "--line-to-continuum", "0.08",
                   "--fwhm", "25", "--y", "0.07")  # fmt: skip
    assert te_mhz["te_k"] == pytest.approx(te["te_k"], rel=1e-5)
    assert _json(capsys, "hi", "--integral", "100")["n_hi_cm2"] == pytest.approx(1.823e20)
    mass = _json(capsys, "hi-mass", "--flux", "4", "--dist", "20")
    assert mass["m_hi_msun"] == pytest.approx(2.356e5 * 400 * 4)
    hubble = _json(capsys, "hi-mass", "--flux", "4", "--vsys", "2000", "--h0", "50")
    assert hubble["m_hi_msun"] == pytest.approx(2.356e5 * 40.0**2 * 4)


def test_zeeman_density_helium_json(capsys: pytest.CaptureFixture[str]) -> None:
    assert _json(capsys, "zeeman", "--line", "HI", "--split", "28")["b_los_ug"] == pytest.approx(10)
    coef = _json(capsys, "zeeman", "--factor", "2.0", "--coefficient", "-5")
    assert coef["b_los_ug"] == pytest.approx(5.0)
    dens = _json(capsys, "density", "--line", "H166a", "--lorentz-fwhm", "50kHz", "--te", "8000")
    assert dens["n"] == 166 and dens["ne_cm3"] > 0
    assert _json(capsys, "helium", "--he", "0.9", "--h", "10")["y_plus"] == pytest.approx(0.09)


def test_table_output(capsys: pytest.CaptureFixture[str]) -> None:
    assert main(["calc", "hi", "--integral", "10"]) == 0
    assert "n_hi_cm2" in capsys.readouterr().out


@pytest.mark.parametrize(
    ("argv", "message"),
    [(["distance", "--l", "30"], "--vlsr is required"),
     (["distance", "--l", "30", "--vlsr", "5", "--curve", "spiral"], "unknown rotation curve"),
     (["te", "--freq", "5GHz", "--line-to-continuum", "-1", "--fwhm", "20"], "positive"),
     (["te", "--freq", "5 km", "--line-to-continuum", "1", "--fwhm", "20"], "--freq"),
     (["hi-mass", "--flux", "1", "--dist", "2", "--vsys", "3"], "exactly one"),
     (["zeeman", "--line", "CO", "--split", "3"], "no splitting factor"),
     (["density", "--n", "12.5", "--lorentz-fwhm", "1"], "integer"),
     ([], "name a calculation")],
)  # fmt: skip
def test_bad_arguments_exit_1_with_one_line(capsys: pytest.CaptureFixture[str], argv: list,
                                            message: str) -> None:  # fmt: skip
    assert main(["calc", *argv]) == 1
    err = capsys.readouterr().err.strip()
    assert message in err and "\n" not in err
