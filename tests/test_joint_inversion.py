"""Joint Bayesian inversion of travel times and log-amplitudes for conductivity.

Layers of tests:

* the amplitude likelihood with the family gains integrated out analytically equals a
  numerical integration over the gains (scipy.integrate.quad), and its gain draws follow
  the stated conditional posterior;
* the conductivity prior (log-uniform 0.1-1000 mS/m) is normalised and sampled correctly
  (Kolmogorov-Smirnov against scipy.stats.loguniform);
* statistical recovery with fixed seeds: picks simulated with soilwave.amplitude's
  forward model (its own accuracy is tested against an independent implementation in
  tests/test_amplitude.py) plus Gaussian log-amplitude and time noise; the true
  conductivities lie inside the central 95 % posterior intervals; a lossless top layer
  gives a posterior at the low end of the prior; layers no amplitude ray reaches keep
  their prior and are flagged.
"""

from __future__ import annotations

import math
import warnings

import numpy as np
import pytest
import xarray as xr
from scipy import integrate, stats

import soilwave as sw
from soilwave.errors import InputError
from soilwave.posterior import AmplitudeLikelihood, LogPosterior
from soilwave.priors import Priors

FREQ = 250.0


def simulate_picks(
    h,
    eps,
    sigma,
    *,
    offsets,
    interfaces,
    gains,
    rng,
    amp_noise=0.05,
    time_sigma=0.15,
    with_amplitude=None,
):
    """Air, ground and reflection picks with times and amplitudes (see module docstring)."""
    x = np.asarray(offsets, float)
    ph = ["air"] * x.size + ["ground"] * x.size
    itf = [0] * (2 * x.size)
    for k in interfaces:
        ph += ["reflection"] * x.size
        itf += [k] * x.size
    xx = np.tile(x, len(ph) // x.size)
    t = sw.TravelTimeOperator(xx, ph, itf)(h, sw.wave_velocity(eps), 0.0)
    la = sw.AmplitudeOperator(xx, ph, itf, frequency_mhz=FREQ)(h, eps, sigma, gains)
    amp = np.exp(la + amp_noise * rng.standard_normal(la.size))
    if with_amplitude is not None:
        amp = np.where(np.isin(ph, with_amplitude), amp, np.nan)
    t = t + time_sigma * rng.standard_normal(t.size)
    return sw.make_picks(
        xx,
        t,
        ph,
        interface=itf,
        sigma=time_sigma,
        frequency_mhz=FREQ,
        amplitude=amp,
        amplitude_sigma=amp_noise * amp,
    )


# --- likelihood with integrated gains ----------------------------------------------------------


def test_marginal_likelihood_equals_numerical_integration_over_gains():
    rng = np.random.default_rng(1)
    x = np.array([0.6, 1.2, 2.0, 0.6, 1.5, 2.5, 0.3, 1.0, 2.2])
    ph = ["air"] * 3 + ["ground"] * 3 + ["reflection"] * 3
    op = sw.AmplitudeOperator(x, ph, [0] * 6 + [1] * 3, frequency_mhz=FREQ)
    phys = {
        "thickness": np.array([[0.6]]),
        "permittivity": np.array([[7.0, 15.0]]),
        "conductivity": np.array([[12.0]]),
        "amplitude_noise_scale": np.array([0.8]),
    }
    amp = np.exp(
        op(phys["thickness"], phys["permittivity"], [[12.0, 0.0]], [0.3, -0.2, 1.0])
        + 0.05 * rng.standard_normal(9)
    )[0]
    err = rng.uniform(0.03, 0.1, 9)
    term = AmplitudeLikelihood(op, amp, err, n_conductivity=1)
    got = term(phys)[0]
    # independent: product over families of the integral over g of the Gaussian likelihood
    # with a flat prior on g (scipy.integrate.quad over a wide finite range)
    m = op(phys["thickness"], phys["permittivity"], [[12.0, 0.0]], 0.0)[0]
    s = 0.8
    total = 0.0
    for f in range(3):
        sel = op.family_index == f
        y, mu, e = np.log(amp[sel]), m[sel], err[sel] * s

        def like(g, y=y, mu=mu, e=e):
            return np.prod(stats.norm.pdf(y, mu + g, e))

        centre = np.sum((y - mu) / e**2) / np.sum(1 / e**2)
        val, _ = integrate.quad(like, centre - 2.0, centre + 2.0, epsabs=0, epsrel=1e-11, limit=200)
        total += math.log(val)
    assert got == pytest.approx(total, abs=1e-8)


def test_gain_draws_follow_the_conditional_posterior():
    x = np.linspace(0.5, 2.5, 6)
    op = sw.AmplitudeOperator(x, ["ground"] * 6, [0] * 6, frequency_mhz=FREQ)
    phys = {
        "thickness": np.zeros((1, 0)),
        "permittivity": np.array([[9.0]]),
        "conductivity": np.array([[5.0]]),
        "amplitude_noise_scale": np.array([1.5]),
    }
    amp = np.exp(op([], [9.0], [5.0], [0.7]) + np.array([0.02, -0.03, 0.01, 0.0, 0.04, -0.01]))
    err = np.full(6, 0.05)
    term = AmplitudeLikelihood(op, amp, err, n_conductivity=1)
    big = {k: np.repeat(v, 20000, axis=0) for k, v in phys.items()}
    g = term.gain_draws(big, np.random.default_rng(3))[:, 0]
    mean = np.mean(np.log(amp) - op([], [9.0], [5.0], 0.0))  # equal weights
    sd = 1.5 * 0.05 / math.sqrt(6)
    # 20000 draws: standard error of the mean sd/141, of the sd about sd/200 (normal theory)
    assert np.mean(g) == pytest.approx(mean, abs=4 * sd / 141)
    assert np.std(g) == pytest.approx(sd, rel=0.03)


# --- priors and posterior structure --------------------------------------------------------------


def test_conductivity_prior_is_normalised_log_uniform():
    p = Priors()
    val, _ = integrate.quad(
        lambda s: math.exp(p.log_prob_conductivity([s])),
        0.1,
        1000.0,
        points=[1.0, 10.0, 100.0],
        limit=200,
    )
    assert val == pytest.approx(1.0, rel=1e-8)
    assert p.log_prob_conductivity([0.05]) == -np.inf
    d = p.sample(
        3000, n_interfaces=1, rng=np.random.default_rng(5), time_zero_mean=0.0, amplitudes=True
    )
    assert d["conductivity"].shape == (3000, 2)
    assert stats.kstest(d["conductivity"][:, 1], stats.loguniform(0.1, 1000).cdf).pvalue > 1e-3
    assert stats.kstest(d["amplitude_noise_scale"], stats.lognorm(1.0).cdf).pvalue > 1e-3
    # the travel-time draws do not depend on the switch
    e = p.sample(3000, n_interfaces=1, rng=np.random.default_rng(5), time_zero_mean=0.0)
    np.testing.assert_array_equal(e["permittivity"], d["permittivity"])
    with pytest.raises(InputError, match="conductivity bounds"):
        Priors(conductivity_min=10.0, conductivity_max=1.0)


def test_posterior_blocks_follow_the_amplitude_picks():
    rng = np.random.default_rng(2)
    picks = simulate_picks(
        [0.5, 0.5],
        [6.0, 12.0, 25.0],
        [8.0, 25.0, 60.0],
        offsets=np.linspace(0.5, 2.5, 5),
        interfaces=[1, 2],
        gains=[0.0, 0.0, 0.0],
        rng=rng,
    )
    post = LogPosterior(picks)
    assert post.n_conductivity == 2
    assert "log_conductivity[2]" in post.names and "log_amplitude_noise_scale" in post.names
    lo, hi = post.bounds()
    s = post.slices["log_conductivity"]
    np.testing.assert_allclose([lo[s][0], hi[s][0]], np.log([0.1, 1000.0]))
    x = post.from_physical(
        {
            "permittivity": [[6.0, 12.0, 25.0]],
            "thickness": [[0.5, 0.5]],
            "time_zero": [0.0],
            "conductivity": [[8.0, 25.0, 60.0]],
        }
    )
    phys = post.to_physical(x)
    np.testing.assert_allclose(phys["conductivity"], [[8.0, 25.0]])
    assert post.residuals(x).shape == (1, 2 * 20 + 1)
    assert np.isfinite(post(x)[0])
    # reflection amplitudes only from interface 1: layer 2 is not sampled
    ds = picks.copy()
    amp = ds["amplitude"].values.copy()
    amp[(ds["interface"].values == 2)] = np.nan
    ds["amplitude"] = ("pick", amp)
    assert LogPosterior(ds).n_conductivity == 1
    # ground-wave amplitudes only: layer 1
    amp[ds["phase"].values.astype(str) == "reflection"] = np.nan
    ds["amplitude"] = ("pick", amp)
    assert LogPosterior(ds).n_conductivity == 1
    assert LogPosterior(ds, amplitudes=False).amplitude_term is None


def test_amplitude_input_errors():
    rng = np.random.default_rng(4)
    picks = simulate_picks(
        [0.5],
        [6.0, 12.0],
        [8.0, 8.0],
        offsets=[0.5, 1.0, 1.5],
        interfaces=[1],
        gains=[0.0, 0.0, 0.0],
        rng=rng,
    )
    no_amp = picks.drop_vars(["amplitude", "amplitude_sigma"])
    with pytest.raises(InputError, match="no 'amplitude' column"):
        LogPosterior(no_amp, amplitudes=True)
    no_freq = picks.copy()
    no_freq.attrs = {k: v for k, v in picks.attrs.items() if k != "frequency_mhz"}
    with pytest.raises(InputError, match="no 'frequency_mhz' attribute"):
        LogPosterior(no_freq)
    with pytest.raises(InputError, match="amplitude_error_floor=0"):
        LogPosterior(picks, amplitude_error_floor=0)
    air_only = picks.copy()
    a = air_only["amplitude"].values.copy()
    a[air_only["phase"].values.astype(str) != "air"] = np.nan
    air_only["amplitude"] = ("pick", a)
    assert LogPosterior(air_only).amplitude_term is None  # air amplitudes carry no loss
    with pytest.raises(InputError, match="no ground or reflection pick has an amplitude"):
        LogPosterior(air_only, amplitudes=True)
    # zero-offset air and ground amplitudes cannot be modelled (1/x^2) and are left out
    zero = sw.make_picks(
        [0.0, 0.5, 1.0],
        [0.0, 5.0, 10.0],
        "ground",
        sigma=0.3,
        frequency_mhz=FREQ,
        amplitude=[9.0, 4.0, 1.0],
    )
    post = LogPosterior(zero)
    assert post.amplitude_term.n == 2
    np.testing.assert_array_equal(post.amplitude_pick_index, [1, 2])


# --- statistical recovery ----------------------------------------------------------------------


@pytest.fixture(scope="module")
def three_layer():
    rng = np.random.default_rng(42)
    truth = {"h": [0.5, 0.6], "eps": [6.0, 12.0, 25.0], "sigma": [8.0, 25.0, 60.0]}
    picks = simulate_picks(
        truth["h"],
        truth["eps"],
        truth["sigma"],
        offsets=np.linspace(0.4, 3.0, 10),
        interfaces=[1, 2],
        gains=[0.0, 0.5, 1.5],
        rng=rng,
    )
    res = sw.invert(picks, seed=7, tau_factor=40.0)
    return truth, res


def test_known_conductivity_recovered_within_credible_intervals(three_layer):
    truth, res = three_layer
    assert res.converged
    c = res.samples["conductivity"]
    assert c.dims == ("sample", "layer") and c.attrs["units"] == "mS/m"
    for layer in (1, 2):
        lo, hi = np.quantile(c.sel(layer=layer).values, [0.025, 0.975])
        assert lo <= truth["sigma"][layer - 1] <= hi, (layer, lo, hi)
    # amplitudes resolve them well: the 95 % interval spans less than a factor 1.5
    for layer in (1, 2):
        lo, hi = np.quantile(c.sel(layer=layer).values, [0.025, 0.975])
        assert hi / lo < 1.5
    # the gains are reported as draws near the truth (0.5 and 1.5 for ground and reflection)
    for name, g in (("log_gain_ground", 0.5), ("log_gain_reflection", 1.5)):
        lo, hi = np.quantile(res.samples[name].values, [0.005, 0.995])
        assert lo <= g <= hi, name


def test_half_space_keeps_its_prior_and_is_flagged(three_layer):
    _, res = three_layer
    flags = res.conductivity_constraint()
    np.testing.assert_array_equal(flags["conductivity_constrained"].values, [1, 1, 0])
    ratio = flags["conductivity_width_ratio"].values
    assert ratio[0] < 0.1 and ratio[1] < 0.1
    assert 0.9 < ratio[2] < 1.1
    # the half-space draws follow the log-uniform prior (KS test, fixed seed)
    half = res.samples["conductivity"].sel(layer=3).values
    assert stats.kstest(half, stats.loguniform(0.1, 1000).cdf).pvalue > 1e-3


def test_summary_and_netcdf_round_trip_carry_conductivity(three_layer, tmp_path):
    _, res = three_layer
    s = res.summary()
    assert s["conductivity"].dims == ("quantile", "depth")
    assert s["layer_conductivity"].dims == ("quantile", "layer")
    med = s["layer_conductivity"].sel(quantile=0.5).values
    # conductivity profile on depth: layer 1 value at 0.1 m, layer 2 value at 0.8 m
    prof = s["conductivity"].sel(quantile=0.5)
    assert float(prof.sel(depth=0.1, method="nearest")) == pytest.approx(med[0], rel=0.05)
    assert float(prof.sel(depth=0.8, method="nearest")) == pytest.approx(med[1], rel=0.05)
    # attenuation quantiles per layer: soilwave.wave.attenuation of the draws
    att = sw.attenuation(
        res.samples["permittivity"].values, res.samples["conductivity"].values, FREQ, unit="dB/m"
    )
    np.testing.assert_allclose(
        s["layer_attenuation"].sel(quantile=0.5).values, np.quantile(att, 0.5, axis=0), rtol=1e-10
    )
    np.testing.assert_array_equal(s["conductivity_constrained"].values, [1, 1, 0])
    path = res.to_netcdf(tmp_path / "joint.nc")
    back = sw.read_result(path)
    xr.testing.assert_allclose(back.samples["conductivity"], res.samples["conductivity"])
    np.testing.assert_array_equal(back.summary()["conductivity_constrained"].values, [1, 1, 0])
    assert back.priors == res.priors
    np.testing.assert_array_equal(
        back.conductivity_constraint()["conductivity_constrained"], [1, 1, 0]
    )


def test_penetration_depth_from_the_posterior(three_layer):
    _, res = three_layer
    q = res.penetration_depth(noise_level=1e-3, quantiles=[0.05, 0.5, 0.95])
    assert q.dims == ("quantile",) and q.attrs["units"] == "m"
    assert float(q[0]) < float(q[1]) < float(q[2])
    per_draw = res.penetration_depth(noise_level=1e-3, quantiles=None)
    i = 123
    s = res.samples.isel(sample=i)
    direct = sw.penetration_depth(
        s["permittivity"].values,
        s["conductivity"].values,
        s["thickness"].values[:2],
        frequency_mhz=FREQ,
        noise_level=1e-3,
        source_amplitude=float(np.exp(s["log_gain_reflection"])),
    )
    assert float(per_draw[i]) == pytest.approx(float(direct), rel=1e-12)
    # a quieter record sees deeper
    assert float(res.penetration_depth(noise_level=1e-4, quantiles=[0.5])[0]) > float(q[1])
    with pytest.raises(InputError, match="no 'noise_level' attribute"):
        res.penetration_depth()


def test_lossless_layer_posterior_sits_at_the_prior_low_end():
    # conductivity 0: the amplitudes decay by spreading only; ground-wave amplitudes only,
    # so layer 2 is not reached and keeps its prior
    rng = np.random.default_rng(8)
    picks = simulate_picks(
        [0.6],
        [9.0, 16.0],
        [0.0, 0.0],
        offsets=np.linspace(0.4, 3.0, 10),
        interfaces=[1],
        gains=[0.0, 0.5, 1.5],
        rng=rng,
        with_amplitude=["air", "ground"],
    )
    res = sw.invert(picks, seed=8, tau_factor=40.0)
    c1 = res.samples["conductivity"].sel(layer=1).values
    # essentially all posterior mass within one decade of the prior's lower bound (0.1)
    assert np.quantile(c1, 0.95) < 1.0
    assert np.median(c1) < 0.5
    flags = res.conductivity_constraint()
    np.testing.assert_array_equal(flags["conductivity_constrained"].values, [1, 0])
    assert 0.9 < float(flags["conductivity_width_ratio"].sel(layer=2)) < 1.1


def test_no_amplitudes_no_conductivity_and_the_result_says_so():
    rng = np.random.default_rng(9)
    picks = simulate_picks(
        [0.6],
        [9.0, 16.0],
        [5.0, 5.0],
        offsets=np.linspace(0.5, 3.0, 8),
        interfaces=[1],
        gains=[0.0, 0.0, 0.0],
        rng=rng,
    )
    picks = picks.drop_vars(["amplitude", "amplitude_sigma"])
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", sw.ConvergenceWarning)
        res = sw.invert(picks, seed=1, tau_factor=20.0)
    assert "conductivity" not in res.samples
    s = res.summary()
    assert "layer_conductivity" not in s
    assert "no usable amplitudes" in s.attrs["conductivity_note"]
    with pytest.raises(InputError, match="no conductivity"):
        res.conductivity_constraint()


def test_table_reports_conductivity_and_prior_only_layers(three_layer):
    _, res = three_layer
    text = res.table()
    assert "conductivity mS/m" in text
    rows = text.splitlines()
    assert rows[-2].split()[0] == "3" and rows[-2].rstrip().endswith("prior only")
    assert "prior only" not in rows[2] and "prior only" not in rows[3]
