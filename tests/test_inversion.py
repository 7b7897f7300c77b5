"""sw.invert: recovery of known layered earths, reproducibility, diagnostics, water content.

Truths are synthetic picks from the forward model (soilwave.traveltime, itself checked
against independent scalar root finding) with seeded Gaussian noise; recovery checks are
statistical with the tolerances written beside them.
"""

import warnings

import numpy as np
import pytest
import xarray as xr

import soilwave as sw
from soilwave.errors import ConvergenceWarning, InputError, RangeWarning


def synthetic_picks(eps, h, *, t0=1.2, sigma=0.25, n_offsets=12, seed=0, x_max=3.5):
    """Air, ground and reflection picks of a layered earth with seeded noise."""
    x = np.linspace(0.3, x_max, n_offsets)
    phases = [("air", 0), ("ground", 0)] + [("reflection", k) for k in range(1, len(h) + 1)]
    offs, ph, itf = [], [], []
    for p, k in phases:
        offs += list(x)
        ph += [p] * x.size
        itf += [k] * x.size
    t = sw.TravelTimeOperator(offs, ph, itf)(np.asarray(h), sw.wave_velocity(np.asarray(eps)), t0)
    t = t + np.random.default_rng(seed).normal(0.0, sigma, t.shape)
    return sw.make_picks(offs, t, ph, interface=itf, sigma=sigma)


TRUTH_1 = {"eps": [7.0, 18.0], "h": [0.9]}
TRUTH_2 = {"eps": [6.0, 15.0, 25.0], "h": [0.8, 1.2]}


@pytest.fixture(scope="module")
def result_1():
    picks = synthetic_picks(TRUTH_1["eps"], TRUTH_1["h"], seed=1)
    return sw.invert(picks, seed=5)


@pytest.fixture(scope="module")
def result_2():
    picks = synthetic_picks(TRUTH_2["eps"], TRUTH_2["h"], seed=2, n_offsets=25, x_max=4.0)
    return sw.invert(picks, seed=6)


def _z(result, name, layer, truth):
    d = result.samples[name].sel(layer=layer).values
    return abs(np.median(d) - truth) / np.std(d)


def test_shapes_names_and_units(result_1):
    s = result_1.samples
    assert s["permittivity"].dims == ("sample", "layer")
    assert list(s["layer"].values) == [1, 2]
    assert s["time_zero"].dims == ("sample",) and s["noise_scale"].dims == ("sample",)
    # the half-space has no thickness and no bottom
    assert np.all(np.isnan(s["thickness"].sel(layer=2)))
    assert np.all(np.isnan(s["depth"].sel(layer=2)))
    for name, unit in [
        ("permittivity", "1"),
        ("velocity", "m/ns"),
        ("thickness", "m"),
        ("depth", "m"),
        ("time_zero", "ns"),
    ]:
        assert s[name].attrs["units"] == unit and s[name].attrs["long_name"]
    # velocity = c / sqrt(eps) (sw.wave_velocity, CODATA c)
    assert np.allclose(s["velocity"], sw.wave_velocity(s["permittivity"].values))
    assert "invert(seed=5" in s.attrs["history"]


def test_recovers_one_interface_truth(result_1):
    # the posterior median lies within 3 posterior standard deviations of the truth
    # (probability > 99 % for a calibrated posterior), and thickness within 5 %
    assert result_1.converged
    assert _z(result_1, "permittivity", 1, TRUTH_1["eps"][0]) < 3
    assert _z(result_1, "permittivity", 2, TRUTH_1["eps"][1]) < 3
    assert _z(result_1, "thickness", 1, TRUTH_1["h"][0]) < 3
    med_h = float(result_1.samples["thickness"].sel(layer=1).median())
    assert abs(med_h - 0.9) < 0.05 * 0.9
    assert abs(float(result_1.samples["time_zero"].median()) - 1.2) < 0.3


@pytest.mark.slow
def test_recovers_two_interface_truth(result_2):
    assert result_2.n_interfaces == 2
    for layer, eps in enumerate(TRUTH_2["eps"][:2], start=1):
        assert _z(result_2, "permittivity", layer, eps) < 3
    for layer, h in enumerate(TRUTH_2["h"], start=1):
        assert _z(result_2, "thickness", layer, h) < 3
    depth2 = result_2.samples["depth"].sel(layer=2).values
    assert abs(np.median(depth2) - 2.0) < 3 * np.std(depth2)
    # the half-space is not sampled by any pick: its posterior is its prior
    # (log-uniform on 1-90, median sqrt(90) = 9.49); 5 % tolerance on the median
    hs = result_2.samples["permittivity"].sel(layer=3).values
    assert abs(np.median(np.log(hs)) - 0.5 * np.log(90.0)) < 0.05 * np.log(90.0)


def test_diagnostics(result_1):
    d = result_1.diagnostics
    for key in ("ess", "tau", "rhat", "acceptance", "converged", "n_steps", "burn_in", "thin"):
        assert key in d
    assert d["ess"].dims == ("parameter",)
    assert list(d["ess"]["parameter"].values) == d["parameter"]
    # emcee's documentation: trust tau only for chains longer than 50 tau
    assert d["n_steps"] >= 50 * float(d["tau"].max())
    assert float(d["ess"].min()) > 400
    assert float(d["rhat"].max()) < 1.01
    assert 0.05 < d["acceptance"] < 0.9
    assert d["burn_in"] >= 2 * float(d["tau"].max()) and d["thin"] >= 1


def test_seed_reproducibility():
    picks = synthetic_picks(TRUTH_1["eps"], TRUTH_1["h"], seed=3, n_offsets=6)
    kw = {"max_steps": 400, "tau_factor": 5.0}
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ConvergenceWarning)
        a = sw.invert(picks, seed=42, **kw)
        b = sw.invert(picks, seed=42, **kw)
        c = sw.invert(picks, seed=43, **kw)
    xr.testing.assert_identical(a.samples.drop_attrs(), b.samples.drop_attrs())
    assert a.seed == 42
    assert not np.array_equal(a.samples["permittivity"].values, c.samples["permittivity"].values)


def test_seed_none_is_recorded_and_repeatable():
    picks = synthetic_picks(TRUTH_1["eps"], TRUTH_1["h"], seed=3, n_offsets=6)
    kw = {"max_steps": 200, "tau_factor": 2.0}
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ConvergenceWarning)
        a = sw.invert(picks, **kw)
        b = sw.invert(picks, seed=a.seed, **kw)
    assert np.array_equal(a.samples["permittivity"].values, b.samples["permittivity"].values)


def test_not_converged_warns_and_records():
    picks = synthetic_picks(TRUTH_1["eps"], TRUTH_1["h"], seed=3, n_offsets=6)
    with pytest.warns(ConvergenceWarning, match="shorter than 50 autocorrelation times"):
        res = sw.invert(picks, seed=1, max_steps=60)
    assert res.diagnostics["converged"] is False
    assert "raise max_steps" in res.diagnostics["reason"]


def test_summary(result_1):
    z = np.array([0.1, 0.5, 1.5, 2.0])
    s = result_1.summary(depth=z)
    assert list(s["quantile"].values) == [0.05, 0.16, 0.5, 0.84, 0.95]
    assert s["permittivity"].dims == ("quantile", "depth")
    assert s["layer_permittivity"].dims == ("quantile", "layer")
    for name in ("permittivity_mean", "permittivity_sd", "velocity_mean", "velocity_sd"):
        assert s[name].dims == ("depth",)
    # derived: at 0.1 m every draw is in layer 1 (thickness prior min 0.02 m, posterior ~0.9 m)
    assert np.allclose(
        s["permittivity"].sel(depth=0.1).values, s["layer_permittivity"].sel(layer=1).values
    )
    assert float(s["permittivity_sd"].sel(depth=0.1)) == pytest.approx(
        float(result_1.samples["permittivity"].sel(layer=1).std(ddof=1))
    )
    # quantiles increase
    assert np.all(np.diff(s["layer_permittivity"].values, axis=0) >= 0)
    assert s["depth"].attrs["units"] == "m"
    with pytest.raises(InputError, match="depth grid"):
        result_1.summary(depth=[-1.0, 0.5])


@pytest.mark.filterwarnings("ignore::soilwave.errors.RangeWarning")
def test_water_content_topp(result_1):
    wc = result_1.water_content()
    assert wc["layer_water_content"].attrs["standard_name"] == (
        "volume_fraction_of_condensed_water_in_soil"
    )
    assert wc["layer_water_content"].attrs["units"] == "1"
    # Topp et al. (1980) is monotone on 1-40, so the median water content is Topp of the
    # median permittivity (derived: quantiles commute with monotone maps)
    med_eps = float(result_1.samples["permittivity"].sel(layer=1).median())
    med_wc = float(wc["layer_water_content"].sel(layer=1, quantile=0.5))
    assert med_wc == pytest.approx(sw.Topp().water_content(med_eps), abs=2e-4)
    # Topp (1980): eps 7 -> theta about 0.12 (value from the published cubic)
    assert med_wc == pytest.approx(float(sw.Topp().water_content(7.0)), abs=0.01)
    assert "calibration" in wc.attrs["caution"]


@pytest.mark.filterwarnings("ignore::soilwave.errors.RangeWarning")
def test_water_content_carries_model_uncertainty(result_1):
    fixed = sw.CRIM(porosity=0.4, eps_solid=4.7, eps_water=80.0)
    uncertain = sw.CRIM(porosity=sw.Uncertain(0.4, 0.05), eps_solid=4.7, eps_water=80.0)
    a = result_1.water_content(fixed, depth=[0.2])
    b = result_1.water_content(uncertain, depth=[0.2])
    width = {
        k: float(
            w["layer_water_content"].sel(layer=1, quantile=0.95)
            - w["layer_water_content"].sel(layer=1, quantile=0.05)
        )
        for k, w in (("fixed", a), ("uncertain", b))
    }
    assert width["uncertain"] > 1.5 * width["fixed"]
    assert b.attrs["petro_model"] == "CRIM"
    with pytest.raises(InputError, match="not a soilwave petrophysical model"):
        result_1.water_content(model="topp")


def test_water_content_warns_outside_valid_range(result_1):
    # Topp is calibrated on about 3-40; the half-space posterior is the prior (1-90)
    with pytest.warns(RangeWarning, match=r"layer\(s\) \[2\]"):
        result_1.water_content(sw.Topp(), depth=[0.2])


def test_table_lists_every_layer(result_1):
    text = result_1.table()
    assert "half-space" in text and "water content" in text
    assert len(text.splitlines()) == 2 + result_1.n_layers + 1


def test_diffraction_picks_are_dropped_with_a_warning():
    picks = synthetic_picks(TRUTH_1["eps"], TRUTH_1["h"], seed=3, n_offsets=6)
    extra = sw.make_picks([1.0], [30.0], "diffraction", sigma=0.5)
    both = sw.merge_picks(picks, extra)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", ConvergenceWarning)
        with pytest.warns(UserWarning, match="diffraction"):
            res = sw.invert(both, seed=0, max_steps=100)
    assert res.picks.sizes["pick"] == both.sizes["pick"]


def test_invert_errors():
    picks = synthetic_picks(TRUTH_1["eps"], TRUTH_1["h"], seed=3, n_offsets=6)
    with pytest.raises(InputError, match=r"must be an xarray\.Dataset"):
        sw.invert(picks.to_dataframe())
    with pytest.raises(InputError, match="seed=-1"):
        sw.invert(picks, seed=-1)
    with pytest.raises(InputError, match=r"must be a soilwave\.Priors"):
        sw.invert(picks, priors={"max_thickness": 1.0})
    with pytest.raises(InputError, match="max_steps=5"):
        sw.invert(picks, seed=0, max_steps=5)
    only_diff = sw.make_picks([1.0, 2.0], [30.0, 31.0], "diffraction", sigma=0.5)
    with pytest.warns(UserWarning), pytest.raises(InputError, match="no air, ground"):
        sw.invert(only_diff)
