"""PetroModel interface: Uncertain parameters, Monte Carlo draws, ranges, errors, provenance.

Statistical checks use fixed seeds and tolerances stated beside them.
"""

import warnings

import numpy as np
import pytest

import soilwave as sw
from soilwave.errors import InputError, RangeWarning, ValidRangeError


def crim(**kw):
    base = {"porosity": 0.4, "eps_solid": 4.7, "eps_water": 80.0}
    return sw.CRIM(**{**base, **kw})


# ----------------------------------------------------------------------------- Uncertain


def test_uncertain_validation_and_repr():
    assert repr(sw.Uncertain(0.4, 0.02)) == "Uncertain(mean=0.4, sd=0.02)"
    with pytest.raises(InputError, match="sd must be finite and >= 0"):
        sw.Uncertain(0.4, -0.1)
    with pytest.raises(InputError, match="outside its bounds"):
        sw.Uncertain(0.4, 0.1, low=0.5)
    with pytest.raises(InputError, match="must be a number"):
        sw.Uncertain("a", 0.1)


def test_uncertain_draw_moments_and_truncation():
    # Normal draws: sample mean within 4 standard errors, sd within 3 % (n = 20000, seed 0).
    d = sw.Uncertain(2.0, 0.5).draw(20000, rng=0)
    assert abs(d.mean() - 2.0) < 4 * 0.5 / np.sqrt(20000)
    assert d.std() == pytest.approx(0.5, rel=0.03)
    # Truncated: all draws inside the bounds.
    t = sw.Uncertain(0.4, 0.3, low=0.1, high=0.6).draw(5000, rng=1)
    assert t.min() >= 0.1 and t.max() <= 0.6


def test_draw_params_respect_physical_bounds():
    # A wide porosity prior is truncated to the physical range (0, 1) of a volume fraction.
    m = crim(porosity=sw.Uncertain(0.4, 0.4))
    p = m.draw_params(5000, rng=2)
    assert p["porosity"].min() > 0 and p["porosity"].max() < 1
    assert np.all(p["eps_solid"] == 4.7)
    with pytest.raises(InputError, match="must be >= 1"):
        m.draw_params(0, rng=0)


# ----------------------------------------------------------------------------- draws


def test_draws_fixed_params_equal_point_values():
    # With fixed parameters and no model error the draws are the deterministic relation.
    m = sw.Topp()
    eps = np.random.default_rng(3).uniform(5, 30, size=(50, 4))
    np.testing.assert_allclose(m.water_content_draws(eps, rng=0), m.water_content(eps), rtol=0)


def test_draws_one_parameter_set_per_sample():
    # Axis 0 is the sample axis: one porosity per sample, shared by all values in it.
    m = crim(porosity=sw.Uncertain(0.4, 0.03))
    eps = np.full((200, 3), 12.0)
    th = m.water_content_draws(eps, rng=4)
    assert th.shape == (200, 3)
    np.testing.assert_allclose(th, th[:, :1].repeat(3, axis=1), rtol=0, atol=0)
    assert th[:, 0].std() > 0.002


def test_draws_mean_and_model_error():
    # Topp et al. (1980) with its standard error 0.013 m3/m3 (value from memory) as scatter:
    # mean within 4 standard errors of the point estimate 0.3454 (derived); sd within 3 %.
    m = sw.Topp(model_error=0.013)
    th = m.water_content_draws(np.full((20000, 2), 20.0), rng=5)
    assert abs(th.mean() - 0.3454) < 4 * 0.013 / np.sqrt(th.size)
    assert th.std() == pytest.approx(0.013, rel=0.03)


def test_draw_spread_grows_with_parameter_sd():
    # CRIM (Birchak et al. 1974): a wider porosity distribution gives wider theta draws,
    # and the draw mean approximates the point estimate (curve nearly linear in porosity).
    eps = np.full((20000, 1), 12.0)
    sds = [0.0, 0.01, 0.03]
    spreads, means = [], []
    for sd in sds:
        th = crim(porosity=sw.Uncertain(0.4, sd)).water_content_draws(eps, rng=6)
        spreads.append(th.std())
        means.append(th.mean())
    assert spreads[0] == 0.0 < spreads[1] < spreads[2]
    point = crim().water_content(12.0)
    # d theta / d phi = (sqrt(e_s) - 1) / (sqrt(e_w) - 1) for CRIM (derived from the equation).
    slope = (np.sqrt(4.7) - 1) / (np.sqrt(80) - 1)
    assert spreads[2] == pytest.approx(0.03 * slope, rel=0.03)
    for mu in means:
        assert mu == pytest.approx(point, abs=1e-3)


def test_draws_input_checks():
    m = sw.Topp()
    with pytest.raises(InputError, match="leading sample axis"):
        m.water_content_draws(10.0, rng=0)
    with pytest.raises(ValidRangeError, match="below 1"):
        m.water_content_draws(np.array([[10.0], [0.5]]), rng=0)
    with pytest.warns(RangeWarning, match="1 of 2 permittivity"):
        m.water_content_draws(np.array([[10.0], [50.0]]), rng=0)


# ----------------------------------------------------------------------------- ranges


def test_on_range_modes():
    m = sw.Topp()
    with pytest.warns(RangeWarning, match=r"Topp: 1 of 2 .* range 3-40 .*index 1: 50"):
        m.water_content([10.0, 50.0])
    with pytest.raises(ValidRangeError, match="outside the calibrated range 3-40"):
        m.water_content([10.0, 50.0], on_range="raise")
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        m.water_content([10.0, 50.0], on_range="ignore")
    with pytest.raises(InputError, match="on_range must be one of"):
        m.water_content(10.0, on_range="clip")
    with pytest.warns(RangeWarning, match=r"water content value\(s\) lie outside"):
        crim().permittivity(0.45)


def test_impossible_values_raise_never_nan():
    m = crim()
    with pytest.raises(ValidRangeError, match=r"below 1 \(first at index 1: 0.5\)"):
        m.water_content([2.0, 0.5])
    with pytest.raises(InputError, match="not finite"):
        m.water_content([np.nan, 10.0])
    with pytest.raises(ValidRangeError, match="outside 0-1 m3/m3"):
        m.permittivity([0.1, -0.05])
    with pytest.raises(ValidRangeError, match="outside 0-1 m3/m3"):
        sw.Topp().permittivity(1.2)


def test_numeric_inverse_outside_bracket_raises():
    # Numeric inversion of a shifted Topp cubic: theta(1) = 0.05 + 0.0292 - 0.00055 + 4.3e-6
    # = 0.0787 (derived),
    # so theta 0.01 has no permittivity >= 1 and must raise, not return NaN.
    m = sw.Topp(inverse="numeric").with_params(a0=0.0)
    assert m.permittivity(0.1, on_range="ignore") > 1.0
    with pytest.raises(ValidRangeError, match=r"have no permittivity in \[1, 200\]"):
        m.with_params(a0=0.05).permittivity(0.01, on_range="ignore")


# ----------------------------------------------------------------------------- immutability, attrs


def test_with_params_is_pure_and_validated():
    m = crim()
    m2 = m.with_params(porosity=sw.Uncertain(0.35, 0.02), model_error=0.01)
    assert m.params["porosity"] == 0.4 and m.model_error == 0.0
    assert m2.params["porosity"] == sw.Uncertain(0.35, 0.02) and m2.model_error == 0.01
    with pytest.raises(InputError, match="unknown parameter 'density'"):
        m.with_params(density=1.0)
    with pytest.raises(InputError, match="model_error must be finite"):
        m.with_params(model_error=-1)
    p = m.params
    p["porosity"] = 0.1  # the returned dict is a copy
    assert m.params["porosity"] == 0.4


def test_repr_and_to_attrs():
    m = crim(porosity=sw.Uncertain(0.38, 0.02))
    assert "porosity=Uncertain(mean=0.38, sd=0.02)" in repr(m)
    attrs = m.to_attrs()
    assert attrs["petro_model"] == "CRIM"
    assert "Birchak" in attrs["petro_reference"]
    assert attrs["petro_porosity"] == 0.38 and attrs["petro_porosity_sd"] == 0.02
    assert "porosity=0.38 +/- 0.02" in attrs["petro_params"]
    assert all(isinstance(v, str | float) for v in attrs.values())
    assert sw.Topp().to_attrs()["petro_inverse"] == "published"


def test_params_validation():
    with pytest.raises(InputError, match="must be a number or Uncertain"):
        sw.Malicki(bulk_density="dense")
    with pytest.raises(InputError, match=r"'bulk_density' = 3\.5 is outside"):
        sw.Malicki(bulk_density=3.5)
