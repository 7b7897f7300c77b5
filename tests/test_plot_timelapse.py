"""Figures of repeat surveys (soilwave.plot_timelapse): what is drawn matches the data."""

import matplotlib

matplotlib.use("Agg")

import matplotlib.pyplot as plt
import numpy as np
import pytest
import xarray as xr

import soilwave as sw
from soilwave.errors import InputError
from soilwave.infiltration_fit import InfiltrationFit
from soilwave.plot_timelapse import (
    plot_front,
    plot_storage,
    plot_water_content_section,
)

Q = np.array([0.05, 0.16, 0.5, 0.84, 0.95])
C = 0.299792458


@pytest.fixture(autouse=True)
def _close():
    yield
    plt.close("all")


def _front():
    t = np.array([-0.5, 2.0, 4.0, 8.0])
    med = np.array([0.0, 0.18, 0.29, 0.47])
    fd = med[:, None] * (1 + np.array([-0.1, -0.05, 0, 0.05, 0.1]))[None, :]
    ds = 300 * fd
    return xr.Dataset(
        {
            "front_depth": (("time", "quantile"), fd, {"units": "m"}),
            "storage_change": (("time", "quantile"), ds, {"units": "mm"}),
            "applied_water": ("time", [0.0, 60.0, 90.0, 140.0], {"units": "mm"}),
        },
        coords={"time": t, "quantile": Q},
    )


def _fit():
    rng = np.random.default_rng(0)
    n = 300
    samples = xr.Dataset(
        {
            "saturated_conductivity": ("sample", rng.lognormal(np.log(1.09), 0.05, n)),
            "suction_head": ("sample", rng.lognormal(np.log(11.01), 0.1, n)),
            "delta_theta": ("sample", rng.normal(0.3, 0.01, n)),
        }
    )
    return InfiltrationFit(model="green-ampt", samples=samples, data=xr.Dataset(), diagnostics={})


def test_plot_front_with_fit():
    front = _front()
    fit = _fit()
    ax = plot_front(front, fit=fit).axes[0]
    assert ax.get_ylabel() == "front depth (m)"
    assert ax.yaxis_inverted()
    # the medians are drawn at the survey times
    pts = next(ln for ln in ax.get_lines() if ln.get_label() == "posterior median (track_front)")
    np.testing.assert_allclose(pts.get_xdata(), front["time"].values)
    np.testing.assert_allclose(pts.get_ydata(), front["front_depth"].sel(quantile=0.5).values)
    # the fitted curve is the Green-Ampt median: compare at one point with the kernel
    curve = next(ln for ln in ax.get_lines() if ln.get_label() == "green-ampt fit, median")
    x, y = curve.get_xdata(), curve.get_ydata()
    i = int(np.argmin(np.abs(x - 4.0)))
    L = sw.green_ampt_front_depth(
        x[i],
        saturated_conductivity=fit.samples["saturated_conductivity"].values,
        suction_head=fit.samples["suction_head"].values,
        delta_theta=fit.samples["delta_theta"].values,
    )
    assert y[i] == pytest.approx(np.median(L) / 100, rel=1e-6)
    labels = [t.get_text() for t in ax.get_legend().get_texts()]
    assert "90 % credible interval" in labels and "68 % credible interval" in labels


def test_plot_storage():
    ax = plot_storage(_front()).axes[0]
    labels = [t.get_text() for t in ax.get_legend().get_texts()]
    assert "applied water" in labels
    assert ax.get_ylabel() == "water (mm)"


def test_water_content_section_image_and_uncertainty():
    c = C
    pos = np.arange(6.0)
    lines = {}
    for t, eps in ((0.0, 9.0), (5.0, 16.0)):
        ta = np.full(6, 1.5 / c)
        tg = 1.5 * np.sqrt(eps + pos) / c
        lines[t] = sw.make_picks(
            np.full(12, 1.5),
            np.r_[ta, tg],
            ["air"] * 6 + ["ground"] * 6,
            sigma=0.2,
            position=np.r_[pos, pos],
            frequency_mhz=250,
        )
    wc = sw.groundwave_water_content(lines, seed=1, n_draws=500)
    ax0, ax1 = plot_water_content_section(wc).axes[:2]
    img = ax0.collections[0].get_array().reshape(2, 6)
    np.testing.assert_allclose(img, wc["water_content"].sel(quantile=0.5).values.T)
    unc = ax1.collections[0].get_array().reshape(2, 6)
    q = wc["water_content"]
    np.testing.assert_allclose(unc, (q.sel(quantile=0.95) - q.sel(quantile=0.05)).values.T)
    assert ax0.get_xlabel() == "position (m)" and ax0.get_ylabel() == "time (h)"
    ax0, ax1 = plot_water_content_section(wc.isel(time=0), uncertainty="sd").axes[:2]
    sd = ax1.collections[0].get_array().ravel()
    np.testing.assert_allclose(sd, wc["water_content_sd"].isel(time=0).values)


def test_non_separable_positions_are_marked():
    pos = np.arange(3.0)
    p = sw.make_picks(
        np.full(6, 0.3),
        np.r_[np.full(3, 0.3 / C), 0.3 * 3 / C + np.zeros(3)],
        ["air"] * 3 + ["ground"] * 3,
        sigma=0.05,
        position=np.r_[pos, pos],
        frequency_mhz=100,
    )
    with pytest.warns(sw.RangeWarning):
        wc = sw.groundwave_water_content(p, seed=0, n_draws=200)
    ax0 = plot_water_content_section(wc).axes[0]
    marks = [ln for ln in ax0.get_lines() if ln.get_label() == "waves not separable"]
    assert marks and marks[0].get_xdata().tolist() == pos.tolist()


def test_errors():
    with pytest.raises(InputError, match="no 'front_depth'"):
        plot_front(xr.Dataset())
    with pytest.raises(InputError, match="no 'storage_change'"):
        plot_storage(xr.Dataset())
    with pytest.raises(InputError, match="no 'water_content'"):
        plot_water_content_section(xr.Dataset())
    with pytest.raises(InputError, match="uncertainty must be 'interval' or 'sd'"):
        plot_water_content_section(
            xr.Dataset({"water_content": ("position", [0.1])}), uncertainty="range"
        )
