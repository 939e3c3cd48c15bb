"""Metal content estimated from absorbance: the calculation alone (API, CLI) and as a run output.

Hand calculation (independent of service.nano): Yu, Qu, Guo, Peng, Chem. Mater. 2003 CdSe
relations, D(550 nm) = 3.04 nm and ε = 5857 D^2.65; bulk CdSe 5.81 g/cm³ (Kasap); CIAAW 2021
atomic weights; N_A = 6.02214076e23 /mol (SI, exact).
"""

from __future__ import annotations

import math

import pytest
from click.testing import CliRunner

from service.cli import main
from tests.test_runs import approved  # noqa: F401  (fixture)

N_A = 6.02214076e23


def _hand_cd_mg(wavelength_nm, absorbance, dilution, volume_ml):
    lam = wavelength_nm
    d = 1.6122e-9 * lam**4 - 2.6575e-6 * lam**3 + 1.6242e-3 * lam**2 - 0.4277 * lam + 41.57
    eps = 5857 * d**2.65
    particles_mol = absorbance / eps * dilution * volume_ml / 1000
    formula_units = math.pi / 6 * (d * 1e-7) ** 3 * 5.81 / (112.414 + 78.971) * N_A
    return particles_mol * formula_units * 112.414 * 1000


def test_estimate_endpoint_matches_a_hand_calculation(api):
    result = api.call("POST", "/estimates", {"core": "CdSe", "wavelength_nm": 550, "absorbance": 0.25,
                                             "dilution_factor": 100, "volume": "4 mL"})
    assert result["core_diameter_nm"] == pytest.approx(3.04, abs=0.005)
    cd = next(e for e in result["elements"] if e["element"] == "Cd")
    assert cd["mass_mg"] == pytest.approx(_hand_cd_mg(550, 0.25, 100, 4.0), rel=1e-3)
    assert 0 < cd["relative_uncertainty"] < 1 and result["caution"]


@pytest.mark.parametrize("wavelength", [300, 700])
def test_estimate_outside_the_relation_is_refused(api, wavelength):
    error = api.call("POST", "/estimates", {"core": "CdSe", "wavelength_nm": wavelength, "absorbance": 0.25,
                                            "volume": "4 mL"}, 422)["error"]
    assert error["code"] == "invalid_estimate" and "outside the valid range" in error["message"]
    assert "nm" in error["message"]


def test_estimate_command():
    result = CliRunner().invoke(main, ["estimate", "--core", "CdSe", "--wavelength", "550", "--absorbance", "0.25",
                                       "--dilution", "100", "--volume", "4 mL"])
    assert result.exit_code == 0, result.output
    assert "core diameter 3.04 nm" in result.output and "Cd" in result.output
    bad = CliRunner().invoke(main, ["estimate", "--core", "CdSe", "--wavelength", "900", "--absorbance", "0.2",
                                    "--volume", "4 mL"])
    assert bad.exit_code == 1 and "outside the valid range" in bad.output


def test_an_estimated_output_in_the_balance(approved):  # noqa: F811
    r = approved["researcher"]
    run = r.call("POST", "/runs", {"procedure_id": approved["proc"]["id"]}, 201)
    # A dilution chosen so the estimate lands near the 22.48 mg Cd that went in.
    dilution = 22.4828 / _hand_cd_mg(550, 0.25, 1, 4.0)
    out = r.call("POST", f"/runs/{run['id']}/outputs", {"label": "CdSe cores, estimated", "method": "estimated",
                 "estimate": {"core": "CdSe", "wavelength_nm": 550, "absorbance": 0.25,
                              "dilution_factor": round(dilution, 3), "volume": "4 mL"}}, 201)
    product = out["outputs"][0]
    assert product["method"] == "estimated" and product["relative_uncertainty"] > 0
    assert product["basis"]["core_diameter_nm"] == pytest.approx(3.04, abs=0.005)
    balance = r.call("GET", f"/runs/{run['id']}/balance")
    cd = next(row for row in balance["elements"] if row["element"] == "Cd")
    assert cd["product_ug"] == pytest.approx(22_483, rel=2e-3)
    assert cd["uncertainty_ug"] == pytest.approx(cd["product_ug"] * product["relative_uncertainty"], abs=1)
    r.call("POST", f"/runs/{run['id']}/outputs", {"label": "bad", "method": "estimated"}, 422)
