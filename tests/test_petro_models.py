"""Published relations of soilwave.petro checked against their sources.

Sources are named beside each check; "derived" values are recomputed here from the
published equation (see /work/shared/references.md, Permittivity to water content).
"""

import numpy as np
import pytest
from scipy import optimize

import soilwave as sw
from soilwave.errors import InputError, RangeWarning, ValidRangeError

# ----------------------------------------------------------------------------- Topp


def test_topp_forward_check_values():
    # Topp, Davis & Annan (1980) eq. theta(eps); derived values to 4 decimals.
    eps = np.array([3, 5, 10, 15, 20, 25, 30, 40], dtype=float)
    expected = [0.0298, 0.0798, 0.1883, 0.2758, 0.3454, 0.4004, 0.4441, 0.5102]
    np.testing.assert_allclose(sw.Topp().water_content(eps), expected, atol=5e-5)
    # Same cubic written out independently (Topp et al. 1980 coefficients).
    direct = -5.3e-2 + 2.92e-2 * eps - 5.5e-4 * eps**2 + 4.3e-6 * eps**3
    np.testing.assert_allclose(sw.Topp().water_content(eps), direct, rtol=1e-12)


def test_topp_published_inverse_check_values():
    # Topp et al. (1980) published inverse eps(theta); derived values to 4 decimals.
    theta = np.array([0.05, 0.10, 0.20, 0.30, 0.40])
    expected = [3.8504, 5.3433, 10.1164, 16.8891, 25.2012]
    np.testing.assert_allclose(sw.Topp().permittivity(theta), expected, atol=5e-5)


def test_topp_two_regressions_are_not_exact_inverses():
    # Topp et al. (1980): the forward and inverse cubics are separate regressions;
    # they disagree by about 0.01 m3/m3 (references.md, derived). No exact round trip.
    m = sw.Topp()
    theta = np.linspace(0.05, 0.40, 36)
    back = m.water_content(m.permittivity(theta))
    gap = np.abs(back - theta)
    assert gap.max() < 0.02
    assert gap.max() > 0.003  # they really are different fits


def test_topp_numeric_inverse_matches_scalar_brentq():
    # Independent implementation: scipy.optimize.brentq on the forward cubic per value.
    m = sw.Topp(inverse="numeric")
    theta = np.array([0.05, 0.12, 0.2, 0.33, 0.45])
    ours = m.permittivity(theta)
    ref = [
        optimize.brentq(
            lambda e, t=t: float(sw.Topp().water_content(e, on_range="ignore")) - t,
            1.0,
            100.0,
            xtol=1e-13,
        )
        for t in theta
    ]
    np.testing.assert_allclose(ours, ref, rtol=1e-9)
    np.testing.assert_allclose(m.water_content(ours), theta, atol=1e-11)


def test_topp_recalibrated_coefficients_switch_to_numeric_inverse():
    # Published inverse only applies to the published forward coefficients (Topp et al. 1980).
    m = sw.Topp().with_params(a0=-0.04)
    theta = np.array([0.1, 0.25])
    np.testing.assert_allclose(m.water_content(m.permittivity(theta)), theta, atol=1e-11)


def test_topp_range_and_model_error():
    # Calibrated range about eps 3-40 (Topp et al. 1980, value from memory).
    m = sw.Topp()
    assert m.valid_eps == (3.0, 40.0)
    with pytest.warns(RangeWarning, match=r"2 of 3 permittivity value\(s\) lie outside.*3-40"):
        m.water_content([2.0, 20.0, 45.0])
    with pytest.raises(InputError, match="inverse must be"):
        sw.Topp(inverse="exact")
    assert sw.Topp(model_error=0.013).model_error == 0.013


# ----------------------------------------------------------------------------- mixing

CRIM_THETA = np.array([0.0, 0.05, 0.10, 0.20, 0.30, 0.40])
CRIM_EPS = np.array([2.8926, 4.4015, 6.2260, 10.8216, 16.6795, 23.7995])


def test_crim_forward_check_values():
    # CRIM, Birchak et al. (1974) / Roth et al. (1990) with a = 0.5;
    # derived values (phi 0.40, e_s 4.7, e_w 80, e_air 1) from references.md.
    m = sw.CRIM(porosity=0.4, eps_solid=4.7, eps_water=80)
    np.testing.assert_allclose(m.permittivity(CRIM_THETA), CRIM_EPS, atol=5e-5)
    # Recomputed from the mixing equation written out here.
    direct = (0.6 * np.sqrt(4.7) + CRIM_THETA * np.sqrt(80.0) + (0.4 - CRIM_THETA)) ** 2
    np.testing.assert_allclose(m.permittivity(CRIM_THETA), direct, rtol=1e-12)


def test_crim_inverse_check_values_and_round_trip():
    # Derived inverse values, references.md (CRIM, phi 0.40, e_s 4.7, e_w 80).
    m = sw.CRIM(porosity=0.4, eps_solid=4.7, eps_water=80)
    eps = np.array([5.0, 10.0, 15.0, 20.0])
    np.testing.assert_allclose(m.water_content(eps), [0.0674, 0.1840, 0.2734, 0.3489], atol=5e-5)
    # 25 lies above the saturated value 23.80: extrapolation, warned.
    with pytest.warns(RangeWarning, match="outside the calibrated range"):
        assert m.water_content(25.0) == pytest.approx(0.4153, abs=5e-5)
    # Closed-form inverse both ways: exact round trip (identity of the algebra).
    theta = np.linspace(0.0, 0.4, 41)
    np.testing.assert_allclose(m.water_content(m.permittivity(theta)), theta, atol=1e-13)


def test_power_law_limits():
    # Birchak et al. (1974) power law: a = 1 is the arithmetic (volume) average,
    # a = -1 the harmonic average, a = 0.5 is CRIM (analytic limits of the formula).
    kw = {"porosity": 0.35, "eps_solid": 5.0, "eps_water": 80.0}
    theta = np.array([0.0, 0.1, 0.35])
    lin = sw.PowerLawMixing(**kw, exponent=1.0).permittivity(theta)
    np.testing.assert_allclose(lin, 0.65 * 5.0 + theta * 80.0 + (0.35 - theta), rtol=1e-12)
    harm = sw.PowerLawMixing(**kw, exponent=-1.0).permittivity(theta)
    np.testing.assert_allclose(harm, 1 / (0.65 / 5.0 + theta / 80.0 + (0.35 - theta)), rtol=1e-12)
    np.testing.assert_allclose(
        sw.PowerLawMixing(**kw, exponent=0.5).permittivity(theta),
        sw.CRIM(**kw).permittivity(theta),
        rtol=1e-14,
    )
    # Roth et al. (1990) fitted a of about 0.46 (value from memory): exact round trip.
    m = sw.PowerLawMixing(**kw, exponent=0.46)
    np.testing.assert_allclose(m.water_content(m.permittivity(theta)), theta, atol=1e-13)
    # Valid water content 0..porosity (mixing model definition).
    assert m.valid_theta == (0.0, 0.35)
    assert m.valid_eps[1] == pytest.approx(float(m.permittivity(0.35)))


def test_mixing_water_from_temperature():
    # Water permittivity from Malmberg & Maryott (1956) when eps_water is not given.
    m = sw.CRIM(porosity=0.4, eps_solid=4.7, temperature=10.0)
    assert m.params["eps_water"] == pytest.approx(83.832, abs=5e-4)
    assert sw.CRIM(porosity=0.4, eps_solid=4.7).params["eps_water"] == pytest.approx(
        80.103, abs=5e-4
    )
    k = sw.CRIM(porosity=0.4, eps_solid=4.7, temperature=20.0, water_formula="kaatze")
    assert k.params["eps_water"] == pytest.approx(80.208, abs=5e-4)  # Kaatze (1989), derived
    with pytest.raises(InputError, match="either eps_water"):
        sw.CRIM(porosity=0.4, eps_solid=4.7, eps_water=80.0, temperature=20.0)


def test_power_law_beyond_saturation_raises_not_nan():
    # Harmonic-type mixing (a = -0.5, Birchak et al. 1974) far beyond saturation gives a
    # negative sum, 0.7/sqrt(5) + 0.9/sqrt(80) - 0.6 < 0 (derived): no real permittivity.
    m = sw.PowerLawMixing(0.3, 5.0, 80.0, exponent=-0.5)
    with pytest.raises(ValidRangeError, match="no finite value"):
        m.permittivity(0.9, on_range="ignore")


def test_mixing_bad_parameters():
    with pytest.raises(InputError, match=r"'porosity' = 1\.2 is outside"):
        sw.CRIM(porosity=1.2, eps_solid=4.7, eps_water=80)
    with pytest.raises(InputError, match="exponent must be nonzero"):
        sw.PowerLawMixing(0.4, 4.7, 80.0, exponent=0.0)
    with pytest.raises(InputError, match="unknown parameter 'exponent'"):
        sw.CRIM(porosity=0.4, eps_solid=4.7, eps_water=80).with_params(exponent=0.4)


# ----------------------------------------------------------------------------- linear


def test_sqrt_linear_round_trip_and_form():
    # theta = a sqrt(eps) + b (common practice); closed-form inverse -> exact round trip.
    m = sw.SqrtLinear(slope=0.115, intercept=-0.17)
    eps = np.random.default_rng(5).uniform(2.5, 60.0, 200)
    np.testing.assert_allclose(m.permittivity(m.water_content(eps)), eps, rtol=1e-13)
    np.testing.assert_allclose(m.water_content(eps), 0.115 * np.sqrt(eps) - 0.17, rtol=1e-13)
    with pytest.raises(InputError, match="valid_eps"):
        sw.SqrtLinear(0.1, -0.1, valid_eps=(0.5, 40.0))


def test_ledieu():
    # Ledieu et al. (1986): theta = 0.1138 sqrt(eps) - 0.1758 (value from memory);
    # derived: eps 25 -> 0.1138*5 - 0.1758 = 0.3932.
    m = sw.Ledieu()
    assert m.water_content(25.0) == pytest.approx(0.3932, abs=1e-12)
    assert m.permittivity(0.3932) == pytest.approx(25.0, rel=1e-12)


def test_malicki_eq10():
    # Malicki, Plagge & Roth (1996) eq. 10, rho_b in g/cm3, written out here.
    for rb in (0.3, 1.2, 1.6):
        m = sw.Malicki(bulk_density=rb)
        eps = np.array([4.0, 9.0, 16.0, 25.0])
        expected = (np.sqrt(eps) - 0.819 - 0.168 * rb - 0.159 * rb**2) / (7.17 + 1.18 * rb)
        np.testing.assert_allclose(m.water_content(eps, on_range="ignore"), expected, rtol=1e-13)
        # Linear in sqrt(eps) with slope 1/(7.17 + 1.18 rho_b) (eq. 10 form).
        slope = np.diff(m.water_content(eps, on_range="ignore")) / np.diff(np.sqrt(eps))
        np.testing.assert_allclose(slope, 1.0 / (7.17 + 1.18 * rb), rtol=1e-12)
        theta = np.linspace(0.05, 0.6, 12)
        np.testing.assert_allclose(m.water_content(m.permittivity(theta)), theta, atol=1e-13)
    # Eq. 10 at rho_b 0.3 and theta 0 gives sqrt(eps) = 0.884 < 1: impossible, never NaN.
    with pytest.raises(ValidRangeError, match="map to a permittivity below 1"):
        sw.Malicki(bulk_density=0.3).permittivity(0.0)
    # Denser soil needs higher permittivity for the same water content (eq. 10).
    assert sw.Malicki(1.6).permittivity(0.2) > sw.Malicki(1.2).permittivity(0.2)


# ----------------------------------------------------------------------------- water

T = np.array([0.0, 10.0, 20.0, 25.0, 30.0])


def test_water_malmberg_maryott():
    # Malmberg & Maryott (1956) cubic; derived values at 0, 10, 20, 25, 30 C.
    np.testing.assert_allclose(
        sw.water_permittivity(T), [87.740, 83.832, 80.103, 78.303, 76.545], atol=5e-4
    )


def test_water_kaatze():
    # Kaatze (1989): 10^(1.94404 - 1.991e-3 T); derived values at 0, 10, 20, 25, 30 C.
    np.testing.assert_allclose(
        sw.water_permittivity(T, formula="kaatze"),
        [87.910, 83.971, 80.208, 78.391, 76.614],
        atol=5e-4,
    )


@pytest.mark.parametrize("formula", ["malmberg-maryott", "kaatze"])
def test_water_against_iapws(formula):
    # Independent reference: IAPWS R8-97 static dielectric constant via the iapws package,
    # at 0.101325 MPa; agreement within 0.5 (spread of the published fits, references.md).
    iapws = pytest.importorskip("iapws")
    from iapws._iapws import _Dielectric

    for t in np.arange(0.0, 40.1, 2.5):
        ref = _Dielectric(iapws.IAPWS97(T=273.15 + t, P=0.101325).rho, 273.15 + t)
        assert sw.water_permittivity(t, formula=formula) == pytest.approx(ref, abs=0.5)


def test_water_range_and_errors():
    with pytest.warns(RangeWarning, match=r"outside the range 0-100 deg C"):
        sw.water_permittivity(120.0)
    with pytest.raises(ValidRangeError, match="outside the range 0-100"):
        sw.water_permittivity([-5.0, 10.0], on_range="raise")
    with pytest.raises(ValidRangeError, match="below absolute zero"):
        sw.water_permittivity(-300.0)
    with pytest.raises(InputError, match="formula must be one of"):
        sw.water_permittivity(20.0, formula="debye")
