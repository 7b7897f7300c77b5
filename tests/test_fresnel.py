"""Tests of soilwave.fresnel: reflection/transmission, critical and Brewster angles.

Check values from /work/shared/references.md (derived from the Fresnel equations
with n = sqrt(e)) and classical identities of optics (energy conservation,
Stokes relations, Fresnel's sine/tangent laws); each check names its source.
"""

import numpy as np
import pytest

from soilwave.errors import InputError, ValidRangeError
from soilwave.fresnel import (
    brewster_angle,
    critical_angle,
    fresnel_coefficients,
    reflection_coefficient,
    transmission_coefficient,
)


@pytest.mark.parametrize(
    ("e1", "e2", "expected"), [(1.0, 9.0, -0.5), (9.0, 25.0, -0.25), (1.0, 81.0, -0.8)]
)
def test_normal_incidence_reflection(e1, e2, expected):
    # references.md "Wave physics": R = (sqrt e1 - sqrt e2)/(sqrt e1 + sqrt e2) (derived)
    assert float(reflection_coefficient(e1, e2)) == pytest.approx(expected, abs=1e-12)


def test_transmission_is_one_plus_r_and_reciprocity():
    # continuity of tangential E at normal incidence: T = 1 + R; reversing the
    # direction flips the sign of R (standard)
    e1 = np.array([1.0, 4.0, 9.0, 25.0])[:, None]
    e2 = np.array([1.0, 5.0, 16.0, 81.0])[None, :]
    r = reflection_coefficient(e1, e2)
    assert r.shape == (4, 4)
    assert np.allclose(transmission_coefficient(e1, e2), 1 + r, rtol=1e-14)
    assert np.allclose(reflection_coefficient(e2, e1), -r, rtol=1e-14)
    # references.md: T(1->9) = 2 * 1 / (1 + 3) = 0.5 (derived)
    assert float(transmission_coefficient(1.0, 9.0)) == pytest.approx(0.5, abs=1e-12)


@pytest.mark.parametrize(("angle", "expected"), [(30.0, -0.5471), (60.0, -0.7035)])
def test_te_reference_values(angle, expected):
    # references.md "Wave physics" derived: 1 -> 9, r_TE at 30 deg -0.5471, at 60 deg -0.7035
    r, _ = fresnel_coefficients(1.0, 9.0, angle, polarization="TE")
    assert r.imag == pytest.approx(0.0, abs=1e-15)
    assert float(r.real) == pytest.approx(expected, abs=5e-5)


def _snell(e1, e2, angle_deg):
    th1 = np.deg2rad(angle_deg)
    th2 = np.arcsin(np.sqrt(e1 / e2) * np.sin(th1))
    return th1, th2


def test_fresnel_sine_and_tangent_laws():
    # Fresnel's laws in angle form (e.g. Born & Wolf, Principles of Optics, sec. 1.5.2):
    # r_TE = -sin(t1 - t2)/sin(t1 + t2); r_par(B&W) = tan(t1 - t2)/tan(t1 + t2),
    # and ours is r_TM = -r_par(B&W) (sign convention stated in soilwave.fresnel)
    angles = np.array([5.0, 20.0, 45.0, 70.0, 85.0])
    for e1, e2 in [(1.0, 9.0), (4.0, 25.0), (25.0, 9.0)]:
        ang = angles[angles < (critical_angle(e1, e2) if e2 < e1 else 90.0)]
        th1, th2 = _snell(e1, e2, ang)
        r_te, _ = fresnel_coefficients(e1, e2, ang, polarization="TE")
        r_tm, _ = fresnel_coefficients(e1, e2, ang, polarization="TM")
        assert np.allclose(r_te.real, -np.sin(th1 - th2) / np.sin(th1 + th2), atol=1e-12)
        assert np.allclose(r_tm.real, -np.tan(th1 - th2) / np.tan(th1 + th2), atol=1e-12)


def test_te_and_tm_coincide_at_normal_incidence():
    # with the stated convention r_TM = r_TE = R and t_TM = t_TE = 1 + R at 0 deg
    for e1, e2 in [(1.0, 9.0), (9.0, 25.0), (25.0, 4.0)]:
        r_te, t_te = fresnel_coefficients(e1, e2, 0.0, polarization="TE")
        r_tm, t_tm = fresnel_coefficients(e1, e2, 0.0, polarization="TM")
        r0 = reflection_coefficient(e1, e2)
        assert r_te == pytest.approx(r0, abs=1e-14)
        assert r_tm == pytest.approx(r0, abs=1e-14)
        assert t_te == pytest.approx(1 + r0, abs=1e-14)
        assert t_tm == pytest.approx(1 + r0, abs=1e-14)


@pytest.mark.parametrize("pol", ["TE", "TM"])
def test_energy_conservation(pol):
    # energy flux across the interface (standard): |r|^2 + (n2 cos t2)/(n1 cos t1) |t|^2 = 1
    angles = np.linspace(0.0, 89.0, 90)
    for e1, e2 in [(1.0, 9.0), (9.0, 25.0), (25.0, 9.0), (81.0, 4.0)]:
        if e2 < e1:
            angles_ok = angles[angles < critical_angle(e1, e2) - 1e-6]
        else:
            angles_ok = angles
        th1, th2 = _snell(e1, e2, angles_ok)
        r, t = fresnel_coefficients(e1, e2, angles_ok, polarization=pol)
        flux = np.sqrt(e2) * np.cos(th2) / (np.sqrt(e1) * np.cos(th1))
        assert np.allclose(np.abs(r) ** 2 + flux * np.abs(t) ** 2, 1.0, atol=1e-12)


@pytest.mark.parametrize("pol", ["TE", "TM"])
def test_stokes_relations(pol):
    # Stokes (1849) relations from time reversal: r' = -r and t t' = 1 - r^2, where the primed
    # coefficients are for the reverse path (lower -> upper at the refraction angle)
    e1, e2 = 4.0, 16.0
    ang = np.array([0.0, 15.0, 40.0, 75.0])
    _, th2 = _snell(e1, e2, ang)
    r, t = fresnel_coefficients(e1, e2, ang, polarization=pol)
    rp, tp = fresnel_coefficients(e2, e1, np.rad2deg(th2), polarization=pol)
    assert np.allclose(rp, -r, atol=1e-12)
    assert np.allclose(t * tp, 1 - r**2, atol=1e-12)


def test_critical_angle_and_total_reflection():
    # derived: arcsin(sqrt(1/9)) = arcsin(1/3) = 19.4712 deg (4 decimals)
    assert float(critical_angle(9.0, 1.0)) == pytest.approx(19.4712, abs=5e-5)
    assert np.isnan(critical_angle(1.0, 9.0))
    assert np.isnan(critical_angle(9.0, 9.0))
    crit = critical_angle(np.array([9.0, 25.0, 81.0]), np.array([1.0, 9.0, 1.0]))
    assert crit.shape == (3,)
    # total reflection beyond the critical angle: |r| = 1, complex r (standard)
    for pol in ("TE", "TM"):
        beyond = np.array([20.0, 45.0, 89.0])
        r, _ = fresnel_coefficients(9.0, 1.0, beyond, polarization=pol)
        assert np.allclose(np.abs(r), 1.0, atol=1e-12)
        assert np.all(np.abs(r.imag) > 1e-3)
        r_below, _ = fresnel_coefficients(9.0, 1.0, 19.0, polarization=pol)
        assert abs(r_below) < 1.0


def test_brewster_angle_and_zero_tm_reflection():
    # references.md derived: Brewster 1 -> 9 = arctan(3) = 71.565 deg (3 decimals)
    assert float(brewster_angle(1.0, 9.0)) == pytest.approx(71.565, abs=5e-4)
    # r_TM vanishes there (standard), both directions; the two Brewster angles sum to 90 deg
    for e1, e2 in [(1.0, 9.0), (9.0, 1.0), (4.0, 25.0)]:
        b = brewster_angle(e1, e2)
        r_tm, _ = fresnel_coefficients(e1, e2, b, polarization="TM")
        r_te, _ = fresnel_coefficients(e1, e2, b, polarization="TE")
        assert abs(r_tm) < 1e-12
        assert abs(r_te) > 0.1
        assert b + brewster_angle(e2, e1) == pytest.approx(90.0, abs=1e-12)


def test_grazing_incidence_reflects_fully():
    # limit at 90 deg: r_TE -> -1 (standard)
    r, _ = fresnel_coefficients(1.0, 9.0, 90.0)
    assert r == pytest.approx(-1.0, abs=1e-12)


def test_broadcasting_and_inputs_not_mutated():
    e1 = np.array([1.0, 4.0])
    ang = np.array([[0.0], [30.0], [60.0]])
    e1_copy, ang_copy = e1.copy(), ang.copy()
    r, t = fresnel_coefficients(e1, 9.0, ang, polarization="tm")
    assert r.shape == t.shape == (3, 2)
    assert np.iscomplexobj(r)
    assert np.array_equal(e1, e1_copy)
    assert np.array_equal(ang, ang_copy)


# --- bad input ----------------------------------------------------------------------


@pytest.mark.parametrize("angle", [-1.0, 90.5])
def test_angle_out_of_range(angle):
    with pytest.raises(InputError, match=r"angle must be between 0 and 90 degrees"):
        fresnel_coefficients(1.0, 9.0, angle)


def test_angle_error_names_index():
    with pytest.raises(InputError, match=r"got 120\.0 at index \(1,\)"):
        fresnel_coefficients(1.0, 9.0, [10.0, 120.0])


def test_unknown_polarization():
    with pytest.raises(InputError, match=r"polarization must be 'TE' or 'TM'; got 'S'"):
        fresnel_coefficients(1.0, 9.0, 10.0, polarization="S")


def test_permittivity_below_one_named():
    with pytest.raises(ValidRangeError, match=r"eps_lower must be >= 1.*got 0\.5"):
        reflection_coefficient(1.0, 0.5)
    with pytest.raises(ValidRangeError, match=r"eps_upper must be >= 1"):
        brewster_angle(0.0, 4.0)
