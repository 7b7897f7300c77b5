"""Inversion figures run headless (Agg) and draw what they claim."""

import subprocess
import sys

import matplotlib
import numpy as np
import pytest

matplotlib.use("Agg")

import matplotlib.pyplot as plt
from matplotlib.figure import Figure

import soilwave as sw
from soilwave.errors import InputError
from soilwave.plot_inversion import plot_corner, plot_profile, plot_traveltime_fit


@pytest.fixture(scope="module")
def result():
    x = np.tile(np.linspace(0.3, 3.0, 8), 3)
    ph = ["air"] * 8 + ["ground"] * 8 + ["reflection"] * 8
    itf = [0] * 16 + [1] * 8
    t = sw.TravelTimeOperator(x, ph, itf)([0.6], sw.wave_velocity(np.array([9.0, 16.0])), 1.0)
    t = t + np.random.default_rng(1).normal(0, 0.25, t.shape)
    return sw.invert(sw.make_picks(x, t, ph, interface=itf, sigma=0.25), seed=2)


def test_traveltime_fit(result):
    fig = plot_traveltime_fit(result)
    assert isinstance(fig, Figure)
    ax = fig.axes[0]
    assert ax.get_xlabel() == "offset (m)" and ax.get_ylabel() == "time (ns)"
    # one band (PolyCollection) and one median line per phase group: air, ground, reflection 1
    assert len(ax.collections) >= 3
    labels = [t.get_text() for t in ax.get_legend().get_texts()]
    assert labels == ["air picks", "ground picks", "reflection 1 picks"]
    plt.close(fig)


def test_profile(result):
    fig = plot_profile(result, depth=np.linspace(0, 1.5, 50))
    assert isinstance(fig, Figure) and len(fig.axes) == 2
    lo, hi = fig.axes[0].get_ylim()
    assert lo > hi  # depth increases downwards
    plt.close(fig)


def test_corner(result):
    fig = plot_corner(result)
    names = ["permittivity[1]", "permittivity[2]", "thickness[1]", "time_zero", "noise_scale"]
    visible = [ax for ax in fig.axes if ax.get_visible()]
    assert len(visible) == len(names) * (len(names) + 1) // 2
    fig2 = plot_corner(result, variables=["permittivity[1]", "thickness[1]"])
    assert sum(ax.get_visible() for ax in fig2.axes) == 3
    with pytest.raises(InputError, match="unknown variable"):
        plot_corner(result, variables=["porosity"])
    with pytest.raises(InputError, match="expected an InversionResult"):
        plot_profile("result.nc")
    plt.close("all")


def test_import_soilwave_does_not_import_matplotlib():
    code = "import sys, soilwave; print('matplotlib' in sys.modules)"
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert out.stdout.strip() == "False"
