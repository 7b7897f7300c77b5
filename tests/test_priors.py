"""Priors of the layered-earth inversion: densities against scipy.stats, sampling, serialisation."""

import math

import numpy as np
import pytest
from scipy import integrate, stats

import soilwave as sw
from soilwave.errors import InputError
from soilwave.priors import Priors


def _params(eps, h, t0, s=None):
    out = {
        "permittivity": np.atleast_2d(np.asarray(eps, float)),
        "thickness": np.atleast_2d(np.asarray(h, float)),
        "time_zero": np.atleast_1d(np.asarray(t0, float)),
    }
    if s is not None:
        out["noise_scale"] = np.atleast_1d(np.asarray(s, float))
    return out


def test_defaults_are_the_documented_ones():
    p = Priors()
    assert (p.permittivity_prior, p.permittivity_min, p.permittivity_max) == ("loguniform", 1, 90)
    assert (p.min_thickness, p.max_thickness) == (0.02, 5.0)
    assert (p.time_zero_mean, p.time_zero_sd, p.noise_scale_sd) == (None, 2.0, 0.5)
    assert "log-normal" in p.describe()


def test_loguniform_permittivity_matches_scipy():
    # reference: scipy.stats.loguniform (independent implementation of the density)
    p = Priors()
    eps = np.array([1.0, 3.0, 9.5, 40.0, 90.0])
    got = np.array([p.log_prob_permittivity([[e]])[0] for e in eps])
    assert np.allclose(got, stats.loguniform(1.0, 90.0).logpdf(eps))


def test_uniform_permittivity_and_thickness_match_scipy():
    p = Priors(permittivity_prior="uniform", min_thickness=0.1, max_thickness=3.0)
    eps = np.array([[2.0, 50.0]])
    assert np.isclose(p.log_prob_permittivity(eps)[0], stats.uniform(1, 89).logpdf(eps).sum())
    h = np.array([[0.5, 2.9]])
    assert np.isclose(p.log_prob_thickness(h)[0], stats.uniform(0.1, 2.9).logpdf(h).sum())


def test_time_zero_and_noise_scale_match_scipy():
    p = Priors(time_zero_sd=1.5, noise_scale_sd=0.4)
    t0 = np.array([-3.0, 0.2, 4.0])
    assert np.allclose(
        p.log_prob_time_zero(t0, time_zero_mean=0.5), stats.norm(0.5, 1.5).logpdf(t0)
    )
    s = np.array([0.3, 1.0, 2.5])
    # log-normal with median 1: scipy.stats.lognorm(s=sd, scale=1)
    assert np.allclose(p.log_prob_noise_scale(s), stats.lognorm(0.4).logpdf(s))


@pytest.mark.parametrize("kind", ["loguniform", "uniform"])
def test_permittivity_density_integrates_to_one(kind):
    # derived: a normalised density integrates to 1 (scipy.integrate.quad)
    p = Priors(permittivity_prior=kind, permittivity_min=2.0, permittivity_max=60.0)
    val, _ = integrate.quad(
        lambda e: math.exp(p.log_prob_permittivity([[e]])[0]), 2.0, 60.0, limit=200
    )
    assert abs(val - 1.0) < 1e-6


def test_joint_log_prob_is_sum_and_minus_inf_outside_bounds():
    p = Priors()
    lp = p.log_prob(_params([4.0, 16.0], [0.5], 0.3, 1.2), time_zero_mean=0.0)
    expect = (
        stats.loguniform(1, 90).logpdf([4.0, 16.0]).sum()
        + stats.uniform(0.02, 4.98).logpdf(0.5)
        + stats.norm(0, 2).logpdf(0.3)
        + stats.lognorm(0.5).logpdf(1.2)
    )
    assert np.isclose(lp[0], expect)
    for bad in (
        _params([0.9, 16.0], [0.5], 0.0, 1.0),
        _params([4.0, 91.0], [0.5], 0.0, 1.0),
        _params([4.0, 16.0], [0.01], 0.0, 1.0),
        _params([4.0, 16.0], [5.5], 0.0, 1.0),
        _params([4.0, 16.0], [0.5], 0.0, -1.0),
    ):
        assert p.log_prob(bad, time_zero_mean=0.0)[0] == -np.inf


def test_log_prob_is_vectorised():
    p = Priors()
    rng = np.random.default_rng(3)
    d = p.sample(50, n_interfaces=2, rng=rng, time_zero_mean=1.0)
    batch = p.log_prob(d, time_zero_mean=1.0)
    rows = [
        p.log_prob({k: v[i : i + 1] for k, v in d.items()}, time_zero_mean=1.0)[0]
        for i in range(50)
    ]
    assert batch.shape == (50,)
    assert np.allclose(batch, rows)


def test_sample_follows_the_prior():
    # Kolmogorov-Smirnov against scipy.stats, fixed seed, 0.1 % significance
    p = Priors(max_thickness=3.0, time_zero_sd=1.0)
    d = p.sample(4000, n_interfaces=2, rng=np.random.default_rng(11), time_zero_mean=2.0)
    assert d["permittivity"].shape == (4000, 3) and d["thickness"].shape == (4000, 2)
    assert stats.kstest(d["permittivity"][:, 1], stats.loguniform(1, 90).cdf).pvalue > 1e-3
    assert stats.kstest(d["thickness"][:, 0], stats.uniform(0.02, 2.98).cdf).pvalue > 1e-3
    assert stats.kstest(d["time_zero"], stats.norm(2.0, 1.0).cdf).pvalue > 1e-3
    assert stats.kstest(d["noise_scale"], stats.lognorm(0.5).cdf).pvalue > 1e-3
    assert np.allclose(d["velocity"], sw.wave_velocity(d["permittivity"]))


def test_fixed_noise_scale():
    p = Priors(noise_scale_sd=None)
    assert not p.sample_noise_scale
    d = p.sample(5, n_interfaces=1, rng=np.random.default_rng(0), time_zero_mean=0.0)
    assert np.all(d["noise_scale"] == 1.0)


def test_with_returns_a_new_object_and_rejects_unknown_fields():
    p = Priors()
    q = p.with_(max_thickness=2.0)
    assert p.max_thickness == 5.0 and q.max_thickness == 2.0
    with pytest.raises(InputError, match="unknown field"):
        p.with_(max_depth=3.0)
    with pytest.raises(AttributeError):
        p.max_thickness = 1.0  # frozen dataclass


@pytest.mark.parametrize(
    ("kw", "pattern"),
    [
        ({"permittivity_prior": "normal"}, "permittivity_prior='normal' is not known"),
        ({"permittivity_min": 0.5}, "below 1"),
        ({"permittivity_min": 10.0, "permittivity_max": 5.0}, "not increasing"),
        ({"min_thickness": 2.0, "max_thickness": 1.0}, "thickness bounds"),
        ({"max_thickness": -1.0}, "max_thickness=-1.0 is not a positive"),
        ({"time_zero_sd": 0.0}, "time_zero_sd=0.0"),
        ({"noise_scale_sd": float("nan")}, "noise_scale_sd=nan"),
        ({"time_zero_mean": float("inf")}, "time_zero_mean=inf"),
    ],
)
def test_invalid_priors_raise(kw, pattern):
    with pytest.raises(InputError, match=pattern):
        Priors(**kw)


@pytest.mark.parametrize(
    "p", [Priors(), Priors(time_zero_mean=1.5, noise_scale_sd=None, permittivity_prior="uniform")]
)
def test_attrs_round_trip(p):
    attrs = p.to_attrs()
    assert all(isinstance(v, str) for v in attrs.values())
    assert Priors.from_attrs(attrs) == p


def test_time_zero_mean_from_air_wave_picks():
    # air wave: t = x / c + t0 (c from scipy.constants via sw.air_wave_time)
    x = np.array([0.5, 1.0, 2.0])
    picks = sw.make_picks(
        np.r_[x, x],
        np.r_[sw.air_wave_time(x) + 3.0, x / 0.1 + 3.0],
        ["air"] * 3 + ["ground"] * 3,
        sigma=0.2,
    )
    assert np.isclose(Priors().resolve_time_zero_mean(picks), 3.0)
    assert Priors(time_zero_mean=-1.0).resolve_time_zero_mean(picks) == -1.0
    ground_only = sw.make_picks(x, x / 0.1, "ground", sigma=0.2)
    assert Priors().resolve_time_zero_mean(ground_only) == 0.0
