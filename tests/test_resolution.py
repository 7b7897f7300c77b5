"""Tests of soilwave.resolution: vertical resolution, Fresnel zone, footprint.

Sources: /work/shared/references.md ("Vertical resolution about lambda/4 (common
practice)"; "First Fresnel zone radius sqrt(lambda d/2 + lambda^2/16) (standard)";
footprint "A = lambda/4 + D/sqrt(e - 1), short axis A/2 (memory; attributed to
Annan and co-workers)"). Numbers below are derived from those formulas with
c = 0.299792458 m/ns.
"""

import numpy as np
import pytest

from soilwave.errors import InputError, ValidRangeError
from soilwave.resolution import footprint, fresnel_zone_radius, vertical_resolution
from soilwave.wave import phase_velocity, wavelength

C = 0.299792458  # m/ns, SI definition (BIPM SI Brochure 2019)


def test_quarter_wavelength_resolution():
    # common practice: lambda/4; e 9, 100 MHz: lambda = C/3/100 MHz = 0.99931 m -> 0.24983 m
    assert float(vertical_resolution(9.0, 100.0)) == pytest.approx(0.24983, abs=5e-6)
    # e 25, 250 MHz: lambda = C/5/250e6 s -> 0.23983 m; /4 = 0.05996 m (derived)
    assert float(vertical_resolution(25.0, 250.0)) == pytest.approx(0.05996, abs=5e-6)


def test_pulse_width_resolution_is_half_wavelength():
    # common practice: v tau / 2 with tau = 1/f (one period) -> lambda / 2
    eps = np.array([4.0, 9.0, 25.0])
    freq = np.array([[100.0], [500.0]])
    pw = vertical_resolution(eps, freq, method="pulse_width")
    assert pw.shape == (2, 3)
    assert np.allclose(pw, C / np.sqrt(eps) * 1e3 / freq / 2, rtol=1e-12)
    qw = vertical_resolution(eps, freq)
    assert np.allclose(pw, 2 * qw, rtol=1e-14)


def test_conductivity_shortens_wavelength_and_resolution():
    # exact phase velocity (references.md: e 25, 100 mS/m, 100 MHz -> v 0.05676 m/ns)
    lossy = float(vertical_resolution(25.0, 100.0, conductivity=100.0))
    assert lossy == pytest.approx(0.05676 * 10 / 4, abs=5e-5)
    assert lossy < float(vertical_resolution(25.0, 100.0))
    pw = float(vertical_resolution(25.0, 100.0, method="pulse_width", conductivity=100.0))
    assert pw == pytest.approx(float(phase_velocity(25.0, 100.0, 100.0)) * 10 / 2, rel=1e-12)


def test_fresnel_zone_radius_formula_and_geometry():
    # standard formula; e 9, 100 MHz, d 1 m: sqrt(0.99931/2 + 0.99931^2/16) = 0.74971 m (derived)
    assert float(fresnel_zone_radius(1.0, 9.0, 100.0)) == pytest.approx(0.74971, abs=5e-6)
    # geometric definition (coincident antennas): the zone edge is where the one-way path
    # exceeds the depth by lambda/4: r^2 = (d + lambda/4)^2 - d^2 (identical to the formula)
    depth = np.array([0.0, 0.3, 1.0, 2.5, 10.0])
    lam = float(wavelength(16.0, 250.0))
    r = fresnel_zone_radius(depth, 16.0, 250.0)
    assert np.allclose(r, np.sqrt((depth + lam / 4) ** 2 - depth**2), rtol=1e-12)
    # at zero depth the radius is lambda/4
    assert r[0] == pytest.approx(lam / 4, rel=1e-12)


def test_fresnel_zone_far_limit():
    # for d >> lambda the radius tends to sqrt(lambda d / 2) (standard)
    lam = float(wavelength(9.0, 1000.0))
    d = 1000.0 * lam
    assert float(fresnel_zone_radius(d, 9.0, 1000.0)) == pytest.approx(
        np.sqrt(lam * d / 2), rel=1e-3
    )


def test_footprint_values():
    # Annan and co-workers' footprint (value from memory): e 9, 100 MHz, d 1 m:
    # A = 0.99931/4 + 1/sqrt(8) = 0.24983 + 0.35355 = 0.60338 m, short axis 0.30169 m (derived)
    long_axis, short_axis = footprint(1.0, 9.0, 100.0)
    assert float(long_axis) == pytest.approx(0.60338, abs=5e-6)
    assert float(short_axis) == pytest.approx(0.30169, abs=5e-6)


def test_footprint_trends_and_broadcasting():
    depth = np.array([[0.5], [1.0], [2.0]])
    eps = np.array([4.0, 9.0, 25.0])
    a, b = footprint(depth, eps, 200.0)
    assert a.shape == b.shape == (3, 3)
    assert np.allclose(b, a / 2, rtol=1e-15)
    assert np.all(np.diff(a, axis=0) > 0)  # grows with depth
    assert np.all(np.diff(a, axis=1) < 0)  # narrows as permittivity increases
    # at zero depth the footprint is lambda/4
    a0, _ = footprint(0.0, 9.0, 100.0)
    assert float(a0) == pytest.approx(float(wavelength(9.0, 100.0)) / 4, rel=1e-14)


# --- bad input ----------------------------------------------------------------------


def test_unknown_method():
    with pytest.raises(InputError, match=r"method must be one of .*got 'half_wave'"):
        vertical_resolution(9.0, 100.0, method="half_wave")


def test_negative_depth():
    with pytest.raises(InputError, match=r"depth must be >= 0 \(depth in m\); got -1\.0"):
        fresnel_zone_radius(-1.0, 9.0, 100.0)
    with pytest.raises(InputError, match=r"depth must be >= 0.*at index \(1,\)"):
        footprint([1.0, -0.2], 9.0, 100.0)


def test_footprint_needs_eps_above_one():
    with pytest.raises(ValidRangeError, match=r"eps must be > 1 .*got 1\.0"):
        footprint(1.0, 1.0, 100.0)


def test_invalid_frequency_and_eps_propagate():
    with pytest.raises(InputError, match="frequency must be > 0"):
        vertical_resolution(9.0, 0.0)
    with pytest.raises(ValidRangeError, match=r"eps must be >= 1"):
        fresnel_zone_radius(1.0, 0.5, 100.0)
