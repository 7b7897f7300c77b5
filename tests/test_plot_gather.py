"""Tests of soilwave.plot_gather (matplotlib figures of gathers, semblance, picks)."""

from __future__ import annotations

import matplotlib.pyplot as plt
import numpy as np
import pytest
import xarray as xr
from scipy import constants

import soilwave as sw
from soilwave.errors import InputError
from soilwave.gather import gather_from_array
from soilwave.plot_gather import plot_gather, plot_picks, plot_semblance

C = constants.c * 1e-9


def ricker(t, f=200.0):
    u = (np.pi * f * 1e-3 * t) ** 2
    return (1 - 2 * u) * np.exp(-u)


@pytest.fixture
def cmp_gather():
    x = np.round(np.arange(0.5, 3.01, 0.1), 6)
    t = np.arange(700) * 0.1
    d = (
        ricker(t[None] - x[:, None] / C)
        + ricker(t[None] - x[:, None] / 0.1)
        - 0.4 * ricker(t[None] - np.sqrt(20.0**2 + (x[:, None] / 0.1) ** 2))
    )
    d += 0.01 * np.random.default_rng(0).standard_normal(d.shape)
    return gather_from_array(d, offsets=x, dt_ns=0.1, frequency_mhz=200.0)


@pytest.fixture(autouse=True)
def _close():
    yield
    plt.close("all")


def test_plot_gather_image_and_wiggle(cmp_gather):
    fig = plot_gather(cmp_gather)
    ax = fig.axes[0]
    assert len(ax.images) == 1
    lo, hi = ax.get_ylim()
    assert lo > hi  # time increases downwards
    assert ax.get_xlabel() == "offset (m)"
    fig2 = plot_gather(cmp_gather, kind="wiggle")
    assert len(fig2.axes[0].lines) == cmp_gather.sizes["offset"]
    _, ax3 = plt.subplots()
    assert plot_gather(cmp_gather, ax=ax3) is ax3.figure


def test_plot_semblance_with_picks(cmp_gather):
    s = sw.semblance(cmp_gather)
    p = sw.pick_semblance(s)
    fig = plot_semblance(s, p)
    ax = fig.axes[0]
    assert ax.get_xlabel() == "RMS velocity (m/ns)"
    assert len(ax.texts) == p.sizes["interface"]


def test_plot_picks_with_posterior_curves(cmp_gather):
    picks = sw.auto_pick(cmp_gather)
    n_s = 200
    rng = np.random.default_rng(1)
    eps = np.column_stack([rng.normal(9.0, 0.1, n_s), rng.normal(20.0, 1.0, n_s)])
    thick = np.column_stack([rng.normal(1.0, 0.01, n_s), np.full(n_s, np.nan)])
    samples = xr.Dataset(
        {
            "permittivity": (("sample", "layer"), eps),
            "thickness": (("sample", "layer"), thick),
            "time_zero": ("sample", np.zeros(n_s)),
        },
        coords={"layer": [1, 2]},
    )

    class Result:  # duck-typed stand-in for soilwave.InversionResult
        pass

    res = Result()
    res.samples = samples
    fig = plot_picks(cmp_gather, picks, result=res, n_curves=20)
    ax = fig.axes[0]
    # 20 draws x 3 phase groups (air, ground, reflection 1) + legend proxy
    curves = [ln for ln in ax.lines if ln.get_alpha() == 0.15]
    assert len(curves) == 60
    # the reflection curves pass near the true hyperbola (forward model check)
    refl = curves[40:]
    xs, ys = refl[0].get_data()
    assert np.allclose(ys, np.sqrt(20.0**2 + (xs / 0.1) ** 2), atol=0.6)
    labels = [tx.get_text() for tx in ax.get_legend().get_texts()]
    assert "reflection 1" in labels and "air" in labels


def test_plot_errors(cmp_gather):
    with pytest.raises(InputError, match="kind must be"):
        plot_gather(cmp_gather, kind="contour")
    with pytest.raises(InputError, match="dims"):
        plot_semblance(cmp_gather)
    picks = sw.make_picks([1.0], [10.0], "ground", sigma=0.3)

    class Bad:
        samples = xr.Dataset({"permittivity": (("sample", "layer"), np.ones((2, 2)))})

    with pytest.raises(InputError, match="thickness"):
        plot_picks(cmp_gather, picks, result=Bad())
