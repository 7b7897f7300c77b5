"""Vectorised log posterior: parameter registry, Jacobian, likelihood against scipy.stats."""

import numpy as np
import pytest
from scipy import stats

import soilwave as sw
from soilwave.errors import InputError
from soilwave.posterior import LogPosterior, ParameterBlock
from soilwave.priors import Priors


def _picks(n_interfaces=2, seed=0, t0=1.0, sigma=0.3, refraction=False):
    x = np.linspace(0.4, 3.6, 9)
    phases = [("air", 0), ("ground", 0)] + [("reflection", k) for k in range(1, n_interfaces + 1)]
    if refraction:
        phases.append(("refraction", 1))
    offs, ph, itf = [], [], []
    for p, k in phases:
        offs += list(x)
        ph += [p] * x.size
        itf += [k] * x.size
    eps = np.array([5.0, 12.0, 20.0][: n_interfaces + 1])
    if refraction:
        eps = np.array([12.0, 5.0])
        offs = list(np.array(offs) + 1.5)
    h = np.array([0.6, 1.0][:n_interfaces])
    op = sw.TravelTimeOperator(offs, ph, itf)
    t = op(h, sw.wave_velocity(eps), t0)
    t = t + np.random.default_rng(seed).normal(0, sigma, t.shape)
    return sw.make_picks(offs, t, ph, interface=itf, sigma=sigma), eps, h


def _phys(eps, h, t0=1.0, s=1.0):
    return {
        "permittivity": np.atleast_2d(eps),
        "thickness": np.atleast_2d(h),
        "time_zero": np.atleast_1d(t0),
        "noise_scale": np.atleast_1d(s),
    }


def test_registry_names_and_slices():
    picks, _, _ = _picks(2)
    post = LogPosterior(picks)
    assert post.n_interfaces == 2 and post.n_layers == 3
    assert post.names == [
        "log_permittivity[1]",
        "log_permittivity[2]",
        "log_permittivity[3]",
        "log_vertical_time[1]",
        "log_vertical_time[2]",
        "time_zero",
        "log_noise_scale",
    ]
    assert post.slices["log_vertical_time"] == slice(3, 5)
    fixed = LogPosterior(picks, priors=Priors(noise_scale_sd=None))
    assert "log_noise_scale" not in fixed.slices and fixed.ndim == 6


def test_physical_round_trip_and_vertical_time():
    picks, eps, h = _picks(2)
    post = LogPosterior(picks)
    x = post.from_physical(_phys(eps, h, 0.7, 1.3))
    phys = post.to_physical(x)
    assert np.allclose(phys["permittivity"], eps)
    assert np.allclose(phys["thickness"], h)
    assert np.allclose(phys["time_zero"], 0.7) and np.allclose(phys["noise_scale"], 1.3)
    # vertical two-way time 2 h / v (derived from the definition of velocity)
    assert np.allclose(phys["vertical_time"], 2 * h / sw.wave_velocity(eps[:2]))


def test_log_jacobian_matches_finite_differences():
    # derived: log|det d(eps, h, t0, s)/dx| by central differences
    picks, eps, h = _picks(2)
    post = LogPosterior(picks)
    x = post.from_physical(_phys(eps, h, 0.7, 1.3))[0]

    def phys_vec(xx):
        p = post.to_physical(xx[None, :])
        return np.concatenate(
            [p["permittivity"][0], p["thickness"][0], p["time_zero"], p["noise_scale"]]
        )

    jac = np.empty((post.ndim, post.ndim))
    step = 1e-6
    for j in range(post.ndim):
        e = np.zeros(post.ndim)
        e[j] = step
        jac[:, j] = (phys_vec(x + e) - phys_vec(x - e)) / (2 * step)
    _, logdet = np.linalg.slogdet(jac)
    assert np.isclose(post.to_physical(x[None, :])["log_jacobian"][0], logdet, rtol=1e-6)


def test_likelihood_matches_scipy_normal():
    picks, eps, h = _picks(1, t0=0.5)
    post = LogPosterior(picks)
    x = post.from_physical(_phys(eps, h, 0.5, 1.7))
    op = sw.TravelTimeOperator.from_picks(picks)
    pred = op(h, sw.wave_velocity(eps), 0.5)
    sigma = picks["sigma"].values * 1.7
    expect = stats.norm(pred, sigma).logpdf(picks["time"].values).sum()
    assert np.isclose(post.log_likelihood(x)[0], expect)
    lp = post.log_prior(x)[0]
    assert np.isclose(post(x)[0], lp + expect)


def test_vectorised_equals_row_by_row():
    picks, eps, h = _picks(2)
    post = LogPosterior(picks)
    rng = np.random.default_rng(4)
    x0 = post.from_physical(_phys(eps, h))
    x = x0 + 0.02 * rng.standard_normal((40, post.ndim))
    batch = post(x)
    rows = np.array([post(x[i : i + 1])[0] for i in range(40)])
    assert batch.shape == (40,)
    assert np.allclose(batch, rows)
    assert post(x.reshape(4, 10, post.ndim)).shape == (4, 10)


def test_outside_prior_and_missing_phase_are_minus_inf():
    picks, eps, h = _picks(1)
    post = LogPosterior(picks, priors=Priors(max_thickness=0.5))
    x = post.from_physical(_phys(eps, h))  # h = 0.6 m > 0.5 m bound
    assert post(x)[0] == -np.inf
    # a head wave needs a faster layer below (Snell's law); with a slower one it does
    # not exist, so picks of it have zero likelihood
    rpicks, reps, rh = _picks(1, refraction=True)
    rpost = LogPosterior(rpicks.isel(pick=rpicks["phase"] != "reflection"))
    ok = rpost.from_physical(_phys(reps, rh))
    swapped = rpost.from_physical(_phys(reps[::-1], rh))
    assert np.isfinite(rpost(ok)[0])
    assert rpost(swapped)[0] == -np.inf


def test_residuals_and_bounds():
    picks, eps, h = _picks(1)
    post = LogPosterior(picks, priors=Priors(time_zero_mean=0.0, time_zero_sd=2.0))
    x = post.from_physical(_phys(eps, h, 1.0))
    r = post.residuals(x)
    assert r.shape == (1, picks.sizes["pick"] + 1)
    assert np.isclose(r[0, -1], 0.5)  # (1 - 0) / 2
    lo, hi = post.bounds()
    assert np.isclose(hi[post.slices["log_permittivity"]][0], np.log(90.0))
    assert np.all(lo < hi)


def test_add_block_extends_the_registry():
    picks, eps, h = _picks(1)
    post = LogPosterior(picks)
    n = post.n_layers

    def fwd(z, phys):
        phys["conductivity"] = np.exp(z)
        return np.sum(z, axis=-1)

    def inv(phys):
        return np.log(np.asarray(phys["conductivity"]))

    block = ParameterBlock(
        "log_conductivity", tuple(f"log_conductivity[{i}]" for i in range(1, n + 1)), "c", fwd, inv
    )
    post.add_block(block, log_prior=lambda phys: np.zeros(phys["conductivity"].shape[0]))
    assert post.names[-n:] == ["log_conductivity[1]", "log_conductivity[2]"]
    assert post.slices["log_conductivity"] == slice(post.ndim - n, post.ndim)
    x = post.from_physical({**_phys(eps, h), "conductivity": np.array([[5.0, 10.0]])})
    assert np.isfinite(post(x)[0])
    with pytest.raises(InputError, match="already exists"):
        post.add_block(block)


def test_errors_name_the_problem():
    picks, _, _ = _picks(2)
    with pytest.raises(InputError, match="n_interfaces=1 but the picks reference interface 2"):
        LogPosterior(picks, n_interfaces=1)
    with pytest.raises(InputError, match="no variable 'sigma'"):
        LogPosterior(picks.drop_vars("sigma"))
    with pytest.raises(InputError, match=r"must be a soilwave\.priors\.Priors"):
        LogPosterior(picks, priors={"max_thickness": 2})
    post = LogPosterior(picks)
    with pytest.raises(InputError, match=r"expected \(\.\.\., 7\)"):
        post(np.zeros((3, 5)))
