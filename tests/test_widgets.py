"""Notebook tools (soilwave.widgets), driven without a browser.

Widget values are set from code and mouse clicks are sent as synthetic
matplotlib events (pixel positions from ``ax.transData``); the tests assert
the tools' state. Expected travel times come from textbook formulas written
out here (straight-ray layered-earth kinematics: direct wave ``x / v``,
reflection hyperbola ``sqrt(x^2 + 4 h^2) / v``, head wave ``x / v2 + 2 h
cos(theta_c) / v1`` with ``sin(theta_c) = v1 / v2``; e.g. Yilmaz 2001,
*Seismic Data Analysis*, sect. 3.1, and Annan 2009, *Electromagnetic
principles of GPR*) with the speed of light from scipy.constants (CODATA).
"""

from __future__ import annotations

import copy
import subprocess
import sys
import warnings

import numpy as np
import pytest
import xarray as xr
from matplotlib.backend_bases import MouseEvent
from scipy import constants

import soilwave as sw
from soilwave import processing
from soilwave.errors import InputError, RangeWarning
from soilwave.gather import gather_from_array
from soilwave.synthetic import synthetic_gather
from soilwave.widgets import GatherViewer, LayerModelExplorer, PickEditor, PosteriorExplorer

C = constants.c * 1e-9  # m/ns, CODATA
WIDGET_MIME = "application/vnd.jupyter.widget-view+json"
FREQ = 250.0


@pytest.fixture(scope="module")
def gather_and_truth():
    """Two-layer CMP gather (eps 9 over 25, 0.8 m) with its true arrivals."""
    return synthetic_gather(
        {"permittivity": [9.0, 25.0], "thickness": [0.8]},
        offsets=np.linspace(0.5, 3.0, 26),
        dt_ns=0.2,
        n_samples=400,
        frequency_mhz=FREQ,
        noise=0.01,
        rng=7,
        return_arrivals=True,
    )


@pytest.fixture(scope="module")
def gather(gather_and_truth):
    return gather_and_truth[0]


def _send(tool, name, offset, time, *, button=1):
    """Send a matplotlib mouse event at data point (offset m, time ns) of the tool's axes."""
    canvas = tool.figure.canvas
    x_px, y_px = tool.ax.transData.transform((offset, time))
    event = MouseEvent(name, canvas, x_px, y_px, button=button)
    canvas.callbacks.process(name, event)
    return event


def _one_pixel_in_time(tool) -> float:
    """Time (ns) spanned by one pixel on the tool's axes (click positions are whole pixels)."""
    inv = tool.ax.transData.inverted()
    (_, t0), (_, t1) = inv.transform([(0, 0), (0, 1)])
    return abs(t1 - t0)


# --- packaging -----------------------------------------------------------------------


def test_import_soilwave_does_not_load_ipywidgets():
    code = "import sys, soilwave; print('ipywidgets' in sys.modules, 'matplotlib' in sys.modules)"
    out = subprocess.run(
        [sys.executable, "-c", code], capture_output=True, text=True, check=True
    ).stdout.split()
    assert out == ["False", "False"]


def test_tools_display_as_widgets(gather):
    viewer = GatherViewer(gather, interactive=False)
    bundle = viewer._repr_mimebundle_()
    assert WIDGET_MIME in bundle
    assert bundle[WIDGET_MIME]["model_id"] == viewer.widget.model_id
    # the static figure is a PNG image
    assert viewer._pane.widget.value[:8] == b"\x89PNG\r\n\x1a\n"


def test_interactive_flag_is_checked(gather):
    with pytest.raises(InputError, match="interactive must be True, False or None"):
        GatherViewer(gather, interactive="yes")


# --- gather viewer -------------------------------------------------------------------


def test_viewer_starts_with_the_recorded_gather(gather):
    viewer = GatherViewer(gather, interactive=False)
    assert viewer.steps == []
    xr.testing.assert_identical(viewer.processed, gather)
    assert viewer.n_renders == 1
    assert viewer.last_error is None


def test_viewer_dewow_removes_a_constant_bias(gather):
    # a running-mean subtraction has zero response at DC (processing.dewow docstring)
    biased = gather + 5.0
    biased.attrs = dict(gather.attrs)
    viewer = GatherViewer(biased, interactive=False)
    assert abs(float(viewer.processed.mean())) > 4.9
    viewer.dewow.value = True
    assert viewer.steps == ["dewow"]
    window = 2000.0 / FREQ  # default: two periods of the centre frequency, ns
    assert viewer.dewow_window_ns.value == pytest.approx(window)
    expected = processing.dewow(biased, window_ns=window)
    np.testing.assert_allclose(viewer.processed.values, expected.values)
    assert abs(float(viewer.processed.mean())) < 0.05
    last = viewer.processed.attrs["history"].splitlines()[-1]
    assert last.endswith(f"dewow(window_ns={window!r}, window_samples=41)")
    # the input gather is never modified
    assert float(biased.mean()) == pytest.approx(5.0 + float(gather.mean()))


def test_viewer_runs_steps_in_order_with_one_redraw(gather):
    viewer = GatherViewer(gather, interactive=False)
    before = viewer.n_renders
    n_hist = len(gather.attrs["history"].splitlines())
    with viewer.hold_updates():
        viewer.normalisation.value = "max"
        viewer.gain.value = "agc"
        viewer.bandpass.value = True
        viewer.dewow.value = True
    assert viewer.n_renders == before + 1
    assert viewer.steps == ["dewow", "bandpass", "agc", "normalize_traces"]
    lines = viewer.processed.attrs["history"].splitlines()
    assert len(lines) == n_hist + 4
    assert [ln.split(" ", 3)[3].split("(")[0] for ln in lines[-4:]] == viewer.steps
    # trace-maximum normalisation: every trace peaks at exactly 1
    np.testing.assert_allclose(np.abs(viewer.processed.values).max(axis=1), 1.0)
    assert viewer.processed.attrs["units"] == "1"
    assert viewer.agc_window_ns.disabled is False
    assert viewer.gain_velocity.disabled is True


def test_viewer_spreading_gain_follows_its_formula(gather):
    # g(t) = r 10^(a r / 20), r = v max(t, dt) (processing.gain_spreading_exponential)
    viewer = GatherViewer(gather, interactive=False)
    with viewer.hold_updates():
        viewer.gain.value = "spreading"
        viewer.gain_velocity.value = 0.1
        viewer.gain_attenuation_db.value = 2.0
    t = gather["time"].values
    r = 0.1 * np.maximum(t, 0.2)
    g = r * 10 ** (2.0 * r / 20)
    np.testing.assert_allclose(viewer.processed.values, gather.values * g[None, :])
    assert viewer.processed.attrs["units"] == "m"


def test_viewer_time_zero_from_the_air_wave():
    # a record starting 10 ns before transmission, then relabelled as if the trigger were
    # 3 ns late: the air wave (x / c) then appears at x / c + 3 ns
    offsets = np.linspace(1.0, 3.0, 9)
    clean = synthetic_gather(
        {"permittivity": [9.0, 25.0], "thickness": [0.8]},
        offsets=offsets,
        dt_ns=0.1,
        n_samples=600,
        t0_ns=-10.0,
        frequency_mhz=FREQ,
    )
    delayed = clean.assign_coords(time=clean["time"] + 3.0)
    viewer = GatherViewer(delayed, interactive=False)
    viewer.time_zero.value = True
    assert viewer.steps == ["time_zero_correction"]
    assert viewer.processed.attrs["time_zero_shift_ns"] == pytest.approx(3.0, abs=0.05)
    np.testing.assert_allclose(viewer.processed["time"].values, clean["time"].values, atol=0.05)


def test_viewer_bad_band_is_reported_and_state_kept(gather):
    viewer = GatherViewer(gather, interactive=False)
    viewer.bandpass.value = True
    viewer.high_mhz.value = 300.0
    good = viewer.processed
    viewer.low_mhz.value = 400.0  # above the high corner
    assert viewer.last_error is not None and "low_mhz" in viewer.last_error
    assert "not done" in viewer.status.value
    assert viewer.processed is good
    assert viewer.steps == ["bandpass"]
    viewer.high_mhz.value = 500.0  # a valid band again clears the error
    assert viewer.last_error is None
    expected = processing.bandpass(gather, low_mhz=400.0, high_mhz=500.0)
    np.testing.assert_allclose(viewer.processed.values, expected.values)


def test_viewer_display_controls_redraw_only(gather):
    viewer = GatherViewer(gather, interactive=False)
    processed = viewer.processed
    renders = viewer.n_renders
    viewer.style.value = "wiggle"
    viewer.clip_percentile.value = 90.0
    assert viewer.processed is processed
    assert viewer.n_renders == renders + 2
    assert viewer.clip_level == pytest.approx(np.percentile(np.abs(gather.values), 90.0))
    assert len(viewer.ax.lines) == gather.sizes["offset"]  # one wiggle line per trace


def test_viewer_mean_trace_removal_on_a_profile():
    rng = np.random.default_rng(3)
    common = rng.normal(size=200)
    data = common[None, :] + 0.1 * rng.normal(size=(12, 200))
    profile = gather_from_array(
        data, positions=np.arange(12) * 0.1, dt_ns=0.2, frequency_mhz=FREQ, antenna_separation_m=0.3
    )
    viewer = GatherViewer(profile, interactive=False)
    assert viewer.background.disabled is False
    viewer.background.value = True
    assert viewer.steps == ["remove_background"]
    np.testing.assert_allclose(viewer.processed.values.mean(axis=0), 0.0, atol=1e-12)


def test_viewer_disables_mean_trace_removal_on_a_cmp(gather):
    viewer = GatherViewer(gather, interactive=False)
    assert viewer.background.disabled is True
    viewer.background.value = True
    assert "remove_background" not in viewer.steps


# --- layer-model explorer --------------------------------------------------------------


def test_explorer_curves_match_textbook_formulas(gather):
    ex = LayerModelExplorer(gather, permittivity=[9.0, 25.0], thickness=[0.8], interactive=False)
    x = ex.offsets
    assert x[0] == pytest.approx(0.5) and x[-1] == pytest.approx(3.0)
    v1 = C / 3.0
    np.testing.assert_allclose(ex.curves[("air", 0)], x / C, rtol=1e-12)
    np.testing.assert_allclose(ex.curves[("ground", 0)], x / v1, rtol=1e-12)
    np.testing.assert_allclose(
        ex.curves[("reflection", 1)], np.sqrt(x**2 + 4 * 0.8**2) / v1, rtol=1e-9
    )
    # the lower layer is slower: no head wave
    assert sorted(ex.curves) == [("air", 0), ("ground", 0), ("reflection", 1)]
    labels = [ln.get_label() for ln in ex.ax.lines]
    assert {"air", "ground", "reflection 1"} <= set(labels)
    assert ex.model["time_zero"] == 0.0
    np.testing.assert_allclose(ex.layers["velocity"], [C / 3.0, C / 5.0])


def test_explorer_sliders_move_the_curves(gather):
    ex = LayerModelExplorer(gather, permittivity=[9.0, 25.0], thickness=[0.8], interactive=False)
    renders = ex.n_renders
    ex.time_zero.value = 2.5
    x = ex.offsets
    np.testing.assert_allclose(ex.curves[("air", 0)], x / C + 2.5, rtol=1e-12)
    ex.permittivity_sliders[0].value = 16.0
    ex.thickness_sliders[0].value = 0.5
    v1 = C / 4.0
    np.testing.assert_allclose(
        ex.curves[("reflection", 1)], np.sqrt(x**2 + 4 * 0.5**2) / v1 + 2.5, rtol=1e-9
    )
    assert ex.model["permittivity"].tolist() == [16.0, 25.0]
    assert ex.model["thickness"].tolist() == [0.5]
    assert ex.n_renders == renders + 3


def test_explorer_head_wave_appears_only_where_it_exists():
    # 0.5 m at eps 16 over eps 4: v2 = 2 v1, sin(theta_c) = 1/2, x_c = 2 h tan(30 deg)
    x = np.linspace(0.0, 4.0, 81)
    ex = LayerModelExplorer(offsets=x, permittivity=[16.0, 4.0], thickness=[0.5], interactive=False)
    v1, v2 = C / 4.0, C / 2.0
    theta = np.arcsin(v1 / v2)
    x_c = 2 * 0.5 * np.tan(theta)
    head = ex.curves[("refraction", 1)]
    assert np.all(np.isnan(head[x < x_c - 1e-9]))
    beyond = x >= x_c + 1e-9
    np.testing.assert_allclose(head[beyond], x[beyond] / v2 + 2 * 0.5 * np.cos(theta) / v1)
    # make the lower layer slower: the head wave is gone from the curves and the figure
    ex.permittivity_sliders[1].value = 25.0
    assert ("refraction", 1) not in ex.curves
    assert "refraction 1" not in [ln.get_label() for ln in ex.ax.lines]


def test_explorer_layers_readout_and_water_content():
    ex = LayerModelExplorer(
        offsets=[0.0, 1.0],
        permittivity=[9.0, 20.0, 6.0],
        thickness=[0.4, 0.7],
        petro_model=sw.Topp(),
        interactive=False,
    )
    eps = np.array([9.0, 20.0, 6.0])
    # zero-offset reflection from interface 2: sum of vertical two-way times 2 h sqrt(eps) / c
    twt = np.cumsum(2 * np.array([0.4, 0.7]) * np.sqrt(eps[:2]) / C)
    np.testing.assert_allclose(ex.layers["vertical_twt"], twt)
    assert ex.curves[("reflection", 2)][0] == pytest.approx(twt[1], rel=1e-9)
    np.testing.assert_allclose(ex.layers["depth"], [0.4, 1.1])
    # Topp, Davis & Annan (1980) cubic: theta = -5.3e-2 + 2.92e-2 e - 5.5e-4 e^2 + 4.3e-6 e^3
    topp = -5.3e-2 + 2.92e-2 * eps - 5.5e-4 * eps**2 + 4.3e-6 * eps**3
    np.testing.assert_allclose(ex.layers["water_content"], topp, rtol=1e-12)
    assert "0.345" in ex.readout.value  # Topp at eps 20
    assert "site calibration" in ex.readout.value


def test_explorer_misfit_to_picks(gather_and_truth):
    gather, truth = gather_and_truth
    picks = sw.make_picks(
        truth["offset"].values,
        truth["time"].values,
        truth["phase"].values,
        interface=truth["interface"].values,
        sigma=0.25,
    )
    ex = LayerModelExplorer(
        gather, permittivity=[9.0, 25.0], thickness=[0.8], picks=picks, interactive=False
    )
    # the true model predicts the true arrivals
    assert ex.misfit["n_used"] == picks.sizes["pick"]
    assert ex.misfit["rms_ns"] < 1e-6
    ex.permittivity_sliders[0].value = 10.0
    assert ex.misfit["rms_ns"] > 0.5
    assert ex.misfit["chi2_per_pick"] == pytest.approx(ex.misfit["rms_ns"] ** 2 / 0.25**2)
    assert "misfit to" in ex.readout.value


def test_explorer_set_model_redraws_once(gather):
    ex = LayerModelExplorer(gather, permittivity=[9.0, 25.0], thickness=[0.8], interactive=False)
    renders = ex.n_renders
    ex.set_model(permittivity=[6.0, 12.0], thickness=[0.3], time_zero=-1.0)
    assert ex.n_renders == renders + 1
    assert ex.model["permittivity"].tolist() == [6.0, 12.0]
    assert ex.curves[("reflection", 1)][0] == pytest.approx(
        np.sqrt(0.5**2 + 4 * 0.3**2) * np.sqrt(6.0) / C - 1.0, rel=1e-9
    )
    with pytest.raises(InputError, match="permittivity needs 2 value"):
        ex.set_model(permittivity=[6.0])


def test_explorer_rejects_bad_input(gather):
    profile = gather_from_array(
        np.zeros((3, 50)),
        positions=[0, 1, 2],
        dt_ns=0.5,
        frequency_mhz=FREQ,
        antenna_separation_m=0.3,
    )
    with pytest.raises(InputError, match="multi-offset gather"):
        LayerModelExplorer(profile, interactive=False)
    with pytest.raises(InputError, match="give a gather, picks or offsets"):
        LayerModelExplorer(interactive=False)
    with pytest.raises(InputError, match="thickness"):
        LayerModelExplorer(gather, permittivity=[9.0, 25.0], thickness=[0.5, 0.5])


# --- pick editor -----------------------------------------------------------------------


def test_click_adds_picks_of_the_chosen_phase(gather):
    ed = PickEditor(gather, interactive=False)
    assert ed.picks is None and ed.n_picks == 0
    ed.phase.value = "ground"
    t_ground = 1.5 * 3.0 / C  # x sqrt(eps) / c at 1.5 m, eps 9
    _send(ed, "button_press_event", 1.5, t_ground)
    ed.phase.value = "reflection"
    ed.interface.value = 1
    t_refl = np.sqrt(1.5**2 + 4 * 0.8**2) * 3.0 / C
    _send(ed, "button_press_event", 1.52, t_refl)  # snaps to the trace at 1.5 m
    assert ed.last_error is None
    assert ed.n_picks == 2
    assert ed.picks["phase"].values.tolist() == ["ground", "reflection"]
    assert ed.picks["interface"].values.tolist() == [0, 1]
    assert ed.picks["offset"].values.tolist() == [1.5, 1.5]
    tol = _one_pixel_in_time(ed)
    np.testing.assert_allclose(ed.picks["time"].values, [t_ground, t_refl], atol=tol)
    # default pick uncertainty: a tenth of the period at 250 MHz (picks.default_sigma)
    np.testing.assert_allclose(ed.picks["sigma"].values, 0.4)
    assert ed.picks.attrs["frequency_mhz"] == FREQ
    assert ed.picks.attrs["history"].splitlines()[-1].split(" ", 3)[3].startswith("add_pick(")
    assert ed.selected == 1
    assert len(ed.selector.options) == 3  # "(none)" and two picks


def test_press_drag_release_moves_a_pick(gather):
    picks = sw.make_picks([1.0, 2.0], [25.0, 30.0], "reflection", interface=1, sigma=0.4)
    ed = PickEditor(gather, picks=picks, interactive=False)
    ed.mode.value = "move"
    _send(ed, "button_press_event", 1.0, 25.0)
    _send(ed, "motion_notify_event", 1.2, 27.0, button=None)
    _send(ed, "button_release_event", 1.5, 28.0)
    assert ed.last_error is None
    assert ed.n_picks == 2
    assert ed.picks["offset"].values.tolist() == [1.5, 2.0]
    assert ed.picks["time"].values[0] == pytest.approx(28.0, abs=_one_pixel_in_time(ed))
    assert ed.picks["time"].values[1] == 30.0
    assert "edit_pick(index=0" in ed.picks.attrs["history"].splitlines()[-1]
    # the table given to the editor is not modified
    assert picks["offset"].values.tolist() == [1.0, 2.0]


def test_click_deletes_the_nearest_pick_within_the_radius(gather):
    picks = sw.make_picks([1.0, 2.0, 3.0], [25.0, 30.0, 35.0], "reflection", interface=1, sigma=0.4)
    ed = PickEditor(gather, picks=picks, interactive=False)
    ed.mode.value = "delete"
    _send(ed, "button_press_event", 2.0, 45.0)  # far from every pick
    assert ed.n_picks == 3
    assert "no pick within" in ed.status.value
    _send(ed, "button_press_event", 2.0, 30.0)
    assert ed.picks["offset"].values.tolist() == [1.0, 3.0]
    assert "drop_picks" in ed.picks.attrs["history"]


def test_other_buttons_and_clicks_outside_are_ignored(gather):
    ed = PickEditor(gather, interactive=False)
    _send(ed, "button_press_event", 1.0, 20.0, button=3)
    event = MouseEvent("button_press_event", ed.figure.canvas, 1, 1, button=1)
    assert event.inaxes is None
    ed.figure.canvas.callbacks.process("button_press_event", event)
    assert ed.n_picks == 0
    assert ed.last_error is None


def test_impossible_pick_is_refused_with_a_message(gather):
    ed = PickEditor(gather, interactive=False)
    ed.phase.value = "air"
    _send(ed, "button_press_event", 3.0, 10.0)  # the air wave at 3 m: 3 / c = 10 ns
    assert ed.n_picks == 1
    ed.phase.value = "ground"
    # a ground wave at 0.5 ns, 9.5 ns before the air wave at the same offset, is
    # faster than light: permittivity below 1 (soilwave.picks compares with the air pick)
    _send(ed, "button_press_event", 3.0, 0.5)
    assert ed.n_picks == 1
    assert ed.last_error is not None and "air" in ed.last_error
    assert "not done" in ed.status.value


def test_form_controls_add_update_and_delete():
    ed = PickEditor(
        offset_range=(0.0, 3.0), time_range=(0.0, 60.0), frequency_mhz=FREQ, interactive=False
    )
    ed.phase.value = "ground"
    ed.offset_box.value = 1.0
    ed.time_box.value = 10.0
    ed.add_button.click()
    ed.offset_box.value = 2.0
    ed.time_box.value = 20.0
    ed.add_button.click()
    assert ed.picks["offset"].values.tolist() == [1.0, 2.0]  # no gather: no snapping
    ed.selector.value = 0
    assert (ed.offset_box.value, ed.time_box.value) == (1.0, 10.0)
    ed.time_box.value = 11.0
    ed.update_button.click()
    assert ed.picks["time"].values.tolist() == [11.0, 20.0]
    ed.delete_button.click()
    assert ed.picks["time"].values.tolist() == [20.0]
    assert ed.selected is None
    ed.delete_button.click()  # nothing chosen
    assert "choose a pick" in ed.last_error
    ed.selector.value = 0
    ed.delete_button.click()
    assert ed.picks is None and ed.n_picks == 0


def test_missing_sigma_and_frequency_is_reported():
    ed = PickEditor(offset_range=(0.0, 3.0), time_range=(0.0, 60.0), interactive=False)
    assert ed.sigma.value == 0.0
    ed.phase.value = "ground"
    ed.offset_box.value, ed.time_box.value = 1.0, 10.0
    ed.add_button.click()
    assert ed.picks is None
    assert "frequency" in ed.last_error
    ed.sigma.value = 0.3
    ed.add_button.click()
    assert ed.picks["sigma"].values.tolist() == [0.3]


def test_save_writes_atomically_and_refuses_to_overwrite(gather, tmp_path):
    target = tmp_path / "cmp_picks.csv"
    ed = PickEditor(gather, path=target, interactive=False)
    ed.save_button.click()
    assert "no picks" in ed.last_error and not target.exists()
    ed.phase.value = "ground"
    ed.add_pick(1.0, 1.0 * 3.0 / C)
    ed.save_button.click()
    assert ed.last_error is None and ed.saved_path == target
    back = sw.read_picks(target)
    np.testing.assert_allclose(back["time"].values, ed.picks["time"].values)
    assert back["phase"].values.tolist() == ["ground"]
    first = target.read_bytes()
    ed.add_pick(2.0, 2.0 * 3.0 / C)
    ed.save_button.click()  # replace is off
    assert "exists" in ed.last_error
    assert target.read_bytes() == first
    ed.replace.value = True
    ed.save_button.click()
    assert ed.last_error is None
    assert sw.read_picks(target).sizes["pick"] == 2
    assert [p.name for p in tmp_path.iterdir()] == ["cmp_picks.csv"]  # no temporary left


def test_figure_is_redrawn_after_each_edit(gather):
    ed = PickEditor(gather, interactive=False)
    png = ed._pane.widget.value
    ed.phase.value = "ground"
    _send(ed, "button_press_event", 1.0, 1.0 * 3.0 / C)
    assert ed._pane.widget.value != png
    marker_lines = [ln for ln in ed.ax.lines if ln.get_label() == "ground"]
    assert len(marker_lines) == 1 and marker_lines[0].get_xdata().tolist() == [1.0]


def test_clickable_canvas_with_ipympl(gather):
    pytest.importorskip("ipympl")
    from ipympl.backend_nbagg import Canvas

    ed = PickEditor(gather, interactive=True)
    assert isinstance(ed._pane.widget, Canvas)
    assert ed._pane.widget in ed.widget.children[0].children
    ed.phase.value = "ground"
    _send(ed, "button_press_event", 2.0, 2.0 * 3.0 / C)
    assert ed.n_picks == 1 and ed.last_error is None


# --- posterior explorer -----------------------------------------------------------------


@pytest.fixture(scope="module")
def result():
    """A short inversion of exact two-layer picks (a quick run, not a converged one)."""
    x = np.tile(np.linspace(0.5, 3.0, 8), 2)
    phase = ["ground"] * 8 + ["reflection"] * 8
    itf = [0] * 8 + [1] * 8
    t = sw.TravelTimeOperator(x, phase, itf)([0.6], [0.1, 0.08], 0.0)
    picks = sw.make_picks(x, t, phase, interface=itf, sigma=0.3)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        return sw.invert(picks, seed=11, n_walkers=16, max_steps=300)


def test_posterior_statistics_of_the_chosen_quantity(result):
    ex = PosteriorExplorer(result, interactive=False)
    eps1 = result.samples["permittivity"].sel(layer=1).values
    assert ex.stats["n"] == eps1.size
    assert ex.stats["median"] == pytest.approx(np.median(eps1), rel=1e-12)
    assert ex.stats["q05"] == pytest.approx(np.quantile(eps1, 0.05), rel=1e-12)
    assert ex.stats["sd"] == pytest.approx(np.std(eps1, ddof=1), rel=1e-12)
    # the histogram is a density: its area is 1
    heights = np.array([p.get_height() for p in ex.ax_hist.patches])
    widths = np.array([p.get_width() for p in ex.ax_hist.patches])
    assert np.sum(heights * widths) == pytest.approx(1.0, rel=1e-9)
    assert ex.bins == len(ex.ax_hist.patches)
    # profile on the right: the summary's permittivity quantiles
    xr.testing.assert_allclose(
        ex.profile, result.summary(ex.profile["depth"].values)["permittivity"]
    )
    assert "median" in ex.summary_text.value


def test_posterior_velocity_is_the_image_of_permittivity(result):
    # v = c / sqrt(eps) is decreasing, so quantiles map onto each other (common knowledge)
    ex = PosteriorExplorer(result, interactive=False)
    ex.quantity.value = "permittivity"
    eps_q95, eps_q05 = ex.stats["q95"], ex.stats["q05"]
    ex.quantity.value = "velocity"
    assert ex.stats["q05"] == pytest.approx(C / np.sqrt(eps_q95), rel=1e-3)
    assert ex.stats["q95"] == pytest.approx(C / np.sqrt(eps_q05), rel=1e-3)


def test_posterior_depth_offers_only_layers_with_a_bottom(result):
    ex = PosteriorExplorer(result, interactive=False)
    ex.layer.value = 2  # the half-space
    ex.quantity.value = "depth"
    assert [v for _, v in ex.layer.options] == [1]
    assert ex.layer.value == 1
    depth = result.samples["depth"].sel(layer=1).values
    assert ex.stats["median"] == pytest.approx(np.median(depth), rel=1e-12)
    assert ex.profile.attrs["long_name"].startswith("relative permittivity")
    ex.quantity.value = "permittivity"
    assert [v for _, v in ex.layer.options] == [1, 2]


def test_posterior_water_content_matches_the_result(result):
    ex = PosteriorExplorer(result, model=sw.Topp(), interactive=False)
    ex.quantity.value = "water_content"
    ex.layer.value = 1
    with warnings.catch_warnings():
        # the half-space permittivity is only constrained by its prior (no refraction
        # picks), so part of it lies outside Topp's range; layer 1 is checked here
        warnings.simplefilter("ignore", RangeWarning)
        wc = result.water_content(sw.Topp())
    layer1 = wc["layer_water_content"].sel(layer=1)
    assert ex.stats["median"] == pytest.approx(float(layer1.sel(quantile=0.5)), abs=1e-12)
    assert ex.stats["q95"] == pytest.approx(float(layer1.sel(quantile=0.95)), abs=1e-12)
    # Topp is increasing in permittivity: median water content = Topp(median eps)
    e = float(np.median(result.samples["permittivity"].sel(layer=1).values))
    topp = -5.3e-2 + 2.92e-2 * e - 5.5e-4 * e**2 + 4.3e-6 * e**3  # Topp et al. (1980)
    assert ex.stats["median"] == pytest.approx(topp, abs=1e-3)
    assert "site calibration" in ex.summary_text.value
    assert ex.profile.attrs["standard_name"] == "volume_fraction_of_condensed_water_in_soil"


def test_posterior_without_a_model_offers_no_water_content(result):
    bare = copy.copy(result)
    bare.model = None
    ex = PosteriorExplorer(bare, interactive=False)
    assert "water_content" not in [v for _, v in ex.quantity.options]
    with pytest.raises(InputError, match="petrophysical model"):
        ex.layer_draws("water_content", 1)


def test_posterior_rejects_bad_input(result):
    with pytest.raises(InputError, match="InversionResult"):
        PosteriorExplorer("not a result", interactive=False)
    with pytest.raises(InputError, match="bins"):
        PosteriorExplorer(result, bins=1, interactive=False)
