"""Tests of soilwave.wave: velocity, attenuation, skin depth, wavelength.

Reference values are from /work/shared/references.md ("derived" = computed from
the named formula) and standard electromagnetic theory; each check names its
source.
"""

import numpy as np
import pytest
from scipy import constants

from soilwave.errors import InputError, ValidRangeError
from soilwave.wave import (
    SPEED_OF_LIGHT,
    attenuation,
    attenuation_rule_db,
    loss_tangent,
    permittivity_from_velocity,
    phase_velocity,
    skin_depth,
    wave_velocity,
    wavelength,
)


def test_speed_of_light_is_si_defined_value():
    # SI definition of the metre (BIPM SI Brochure, 9th ed. 2019): c = 299 792 458 m/s exactly
    assert SPEED_OF_LIGHT == pytest.approx(299_792_458e-9, rel=1e-15)


@pytest.mark.parametrize(
    ("eps", "expected"),
    [(1, 0.2998), (4, 0.1499), (9, 0.0999), (16, 0.0749), (25, 0.0600), (81, 0.0333)],
)
def test_wave_velocity_table(eps, expected):
    # references.md "Wave physics", v = c / sqrt(e) (derived), 4 decimals
    assert round(float(wave_velocity(eps)), 4) == pytest.approx(expected, abs=1e-12)


def test_velocity_plausible_for_davis_annan_materials():
    # Davis & Annan (1989), material table (checked via a textbook reproduction; a plausibility
    # range, not a precise value): the velocity range c/sqrt(e) over each permittivity range
    # contains the tabulated typical velocity; water e 80 -> 0.033 m/ns within table rounding
    table = {  # material: (e_min, e_max, v_table)
        "dry sand": (3.0, 5.0, 0.15),
        "saturated sand": (20.0, 30.0, 0.06),
        "clay": (5.0, 40.0, 0.06),
        "granite": (4.0, 6.0, 0.13),
        "limestone": (4.0, 8.0, 0.12),
        "ice": (3.0, 4.0, 0.16),
    }
    for name, (e_min, e_max, v_tab) in table.items():
        v_slow, v_fast = wave_velocity([e_max, e_min])
        assert v_slow <= v_tab <= v_fast, name
    assert float(wave_velocity(80.0)) == pytest.approx(0.033, abs=1e-3)


def test_permittivity_from_velocity_inverts_wave_velocity():
    # identity: eps = (c / v)^2 is the inverse of v = c / sqrt(eps)
    eps = np.array([1.0, 2.5, 9.0, 25.0, 81.0])
    assert np.allclose(permittivity_from_velocity(wave_velocity(eps)), eps, rtol=1e-13)
    # references.md: v 0.1 m/ns in the table range; (0.299792458 / 0.1)^2 = 8.98755 (derived)
    assert float(permittivity_from_velocity(0.1)) == pytest.approx(8.98755, abs=5e-6)


@pytest.mark.parametrize(
    ("eps", "sigma", "alpha_np", "v"),
    [
        (9.0, 1.0, 0.06279, 0.09993),
        (25.0, 10.0, 0.37649, 0.05992),
        (25.0, 100.0, 3.5664, 0.05676),
        (81.0, 1000.0, 15.972, 0.02542),
    ],
)
def test_exact_attenuation_and_velocity_derived_checks(eps, sigma, alpha_np, v):
    # references.md "Wave physics", derived checks at 100 MHz from the exact plane-wave
    # alpha/beta formulas (standard EM theory); compare to the decimals given
    decimals_a = len(str(alpha_np).split(".")[1])
    assert float(attenuation(eps, sigma, 100.0)) == pytest.approx(
        alpha_np, abs=0.5 * 10**-decimals_a
    )
    assert float(phase_velocity(eps, sigma, 100.0)) == pytest.approx(v, abs=0.5e-5)


def test_exact_attenuation_in_db():
    # references.md derived check: e 25, sigma 10 mS/m, 100 MHz -> 3.2701 dB/m
    assert float(attenuation(25.0, 10.0, 100.0, unit="dB/m")) == pytest.approx(3.2701, abs=5e-5)


def test_exact_matches_complex_wavenumber_independent_implementation():
    # independent form (standard EM theory): k = omega sqrt(mu0 eps0 (eps - i sigma/(omega eps0)))
    # for exp(i(kz - omega t)); alpha = |Im k|, beta = Re k
    eps = np.array([1.0, 4.0, 9.0, 25.0, 81.0])[:, None, None]
    sigma = np.array([0.0, 0.1, 1.0, 10.0, 100.0, 1000.0])[None, :, None]
    freq = np.array([10.0, 100.0, 500.0, 1600.0])[None, None, :]
    omega = 2 * np.pi * freq * 1e6
    eps_c = eps - 1j * sigma * 1e-3 / (omega * constants.epsilon_0)
    k = omega * np.sqrt(constants.mu_0 * constants.epsilon_0 * eps_c)
    alpha_ref = np.abs(k.imag)
    v_ref = omega / k.real * 1e-9
    alpha = attenuation(eps, sigma, freq)
    assert alpha.shape == (5, 6, 4)
    assert np.allclose(alpha, alpha_ref, rtol=1e-10, atol=1e-15)
    assert np.allclose(phase_velocity(eps, sigma, freq), v_ref, rtol=1e-12)


def test_low_loss_coefficient_is_1_636_db():
    # references.md derived: sigma Z0 / (2 sqrt(e)) = 1.636 sigma[mS/m]/sqrt(e) dB/m
    assert float(attenuation(1.0, 1.0, 100.0, unit="dB/m", low_loss=True)) == pytest.approx(
        1.636, abs=5e-4
    )
    # Z0 = 376.730 ohm (references.md): alpha = 1e-3 * 376.730 / 2 Np/m per mS/m at e = 1
    assert float(attenuation(1.0, 1.0, 1.0, low_loss=True)) == pytest.approx(
        376.730e-3 / 2, abs=5e-7
    )


def test_low_loss_limit_agrees_when_loss_tangent_small():
    # standard EM theory: alpha_exact = alpha_lowloss (1 - p^2/8 + O(p^4)) for p << 1
    eps, sigma, f = 25.0, 1.0, 1000.0
    p = float(loss_tangent(eps, sigma, f))
    assert p < 1e-3
    exact = float(attenuation(eps, sigma, f))
    approx = float(attenuation(eps, sigma, f, low_loss=True))
    assert approx > exact
    assert (approx - exact) / approx == pytest.approx(p**2 / 8, rel=1e-3)


def test_low_loss_limit_diverges_when_loss_tangent_large():
    # references.md derived: e 81, sigma 1000 mS/m, 100 MHz: exact 15.972 Np/m, while the
    # low-loss form gives 1 S/m * 376.73 / (2 * 9) = 20.93 Np/m: > 25 % too high (p ~ 2.2)
    assert float(loss_tangent(81.0, 1000.0, 100.0)) > 2.0
    approx = float(attenuation(81.0, 1000.0, 100.0, low_loss=True))
    assert approx == pytest.approx(376.730 / 18, abs=5e-3)
    assert approx / float(attenuation(81.0, 1000.0, 100.0)) > 1.25


def test_good_conductor_limit():
    # standard EM theory: for p >> 1, alpha -> sqrt(omega mu0 sigma / 2) (good conductor)
    sigma_s = 1000.0  # S/m
    f = 100.0
    ref = np.sqrt(2 * np.pi * f * 1e6 * constants.mu_0 * sigma_s / 2)
    assert float(attenuation(1.0, sigma_s * 1e3, f)) == pytest.approx(ref, rel=1e-4)


def test_low_loss_is_frequency_independent_and_broadcasts():
    a = attenuation(9.0, 5.0, np.array([50.0, 100.0, 1000.0]), low_loss=True)
    assert a.shape == (3,)
    assert np.all(a == a[0])


def test_rule_of_thumb_is_about_three_percent_above_physics():
    # references.md: rule 1.69 sigma/sqrt(e) dB/m (Annan, value from memory) vs 1.636 (derived)
    rule = float(attenuation_rule_db(16.0, 8.0))
    assert rule == pytest.approx(1.69 * 8.0 / 4.0, abs=1e-12)
    physics = float(attenuation(16.0, 8.0, 100.0, unit="dB/m", low_loss=True))
    assert 1.0 < rule / physics < 1.04


def test_loss_tangent_value():
    # derived from p = sigma / (omega eps0 e): e 25, 10 mS/m, 100 MHz
    ref = 10e-3 / (2 * np.pi * 100e6 * 8.8541878128e-12 * 25)  # eps0 CODATA 2018
    assert float(loss_tangent(25.0, 10.0, 100.0)) == pytest.approx(ref, rel=1e-9)


def test_skin_depth_is_inverse_alpha_and_infinite_when_lossless():
    # definition: skin depth 1/alpha (references.md, standard EM theory)
    sd = skin_depth([9.0, 25.0, 9.0], [1.0, 10.0, 0.0], 100.0)
    assert sd[0] == pytest.approx(1 / 0.06279, rel=1e-4)  # references.md derived alpha
    assert sd[1] == pytest.approx(1 / 0.37649, rel=2e-5)
    assert np.isinf(sd[2])


def test_phase_velocity_lossless_equals_wave_velocity():
    eps = np.linspace(1.0, 81.0, 9)
    assert np.allclose(phase_velocity(eps, 0.0, 100.0), wave_velocity(eps), rtol=1e-14)


def test_wavelength():
    # lambda = v / f; e 9, 100 MHz: 0.299792458 / 3 / 1e8 s * 1e9 = 0.99931 m (derived)
    assert float(wavelength(9.0, 100.0)) == pytest.approx(0.99931, abs=5e-6)
    # with conductivity it uses the phase velocity: references.md e 25, 100 mS/m -> v 0.05676
    assert float(wavelength(25.0, 100.0, conductivity=100.0)) == pytest.approx(0.5676, abs=5e-5)


def test_inputs_not_mutated():
    eps = np.array([4.0, 9.0])
    sigma = np.array([1.0, 2.0])
    before = (eps.copy(), sigma.copy())
    attenuation(eps, sigma, 100.0, unit="dB/m")
    skin_depth(eps, sigma, 100.0)
    assert np.array_equal(eps, before[0])
    assert np.array_equal(sigma, before[1])


def test_scalar_in_scalar_out():
    assert np.ndim(wave_velocity(9.0)) == 0
    assert np.ndim(attenuation(9.0, 1.0, 100.0)) == 0


# --- bad input ----------------------------------------------------------------------


def test_permittivity_below_one_rejected():
    with pytest.raises(ValidRangeError, match=r"eps must be >= 1.*got 0\.5"):
        wave_velocity(0.5)


def test_permittivity_error_names_array_index():
    with pytest.raises(ValidRangeError, match=r"got 0\.9 at index \(2,\)"):
        attenuation([4.0, 9.0, 0.9], 1.0, 100.0)


def test_nan_permittivity_rejected():
    with pytest.raises(ValidRangeError, match=r"eps must be >= 1.*nan"):
        wave_velocity(np.nan)


def test_negative_conductivity_rejected():
    with pytest.raises(InputError, match=r"conductivity must be >= 0 .*mS/m.*got -1\.0"):
        attenuation(9.0, -1.0, 100.0)


@pytest.mark.parametrize("freq", [0.0, -100.0])
def test_nonpositive_frequency_rejected(freq):
    with pytest.raises(InputError, match=r"frequency must be > 0 \(frequency in MHz\)"):
        phase_velocity(9.0, 1.0, freq)


def test_low_loss_still_validates_frequency():
    with pytest.raises(InputError, match="frequency must be > 0"):
        attenuation(9.0, 1.0, 0.0, low_loss=True)


def test_unknown_unit_rejected():
    with pytest.raises(InputError, match=r"unit must be 'Np/m' or 'dB/m'; got 'dB'"):
        attenuation(9.0, 1.0, 100.0, unit="dB")


def test_non_numeric_rejected():
    with pytest.raises(InputError, match="eps must be a number"):
        wave_velocity("wet")


def test_velocity_faster_than_light_rejected():
    with pytest.raises(ValidRangeError, match=r"v must be <= the speed of light.*got 0\.31"):
        permittivity_from_velocity(0.31)
    with pytest.raises(InputError, match=r"v must be > 0"):
        permittivity_from_velocity([0.1, 0.0])
