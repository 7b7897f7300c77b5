"""``soilwave demo``: the whole job, end to end, on the bundled invented data.

Steps (each writes its products into the output folder):

1. **Site calibration** of a CRIM model (porosity free) on the core pairs.
2. **Multi-offset gathers**: dewow and band-pass, automatic picks (air,
   ground, reflections, with amplitudes) saved as CSV pick tables.
3. **Layered-earth inversion** of the survey before wetting (dry loam over
   the sand): posterior permittivity, conductivity (from amplitudes), depths
   and calibrated water content with credible intervals.
4. **Wetting front** through the repeat surveys: front depth, water content
   above and below, storage change; then **Green-Ampt** infiltration
   parameters.
5. **Line map**: water content along the fixed-offset line over time from
   air- and ground-wave picks.
6. A plain-text **report** with the numbers, next to the NetCDF results and
   PNG figures.

The data are synthetic (see ``data_demo/README.md``); the report prints the
invented truth beside the estimates so the reader can judge the recovery.
"""

from __future__ import annotations

import csv
import datetime as _dt
import io
import time
import tomllib
import warnings
from pathlib import Path

import numpy as np
from tqdm.auto import tqdm

from soilwave.atomic import atomic_write, write_dataset, write_text
from soilwave.autopick import auto_pick, pick_line_arrivals
from soilwave.errors import FileFormatError, InputError, OutputExistsError
from soilwave.gather_io import read_gather
from soilwave.groundwave_line import groundwave_water_content
from soilwave.infiltration_fit import fit_green_ampt
from soilwave.inversion import invert
from soilwave.petro import CRIM, calibrate
from soilwave.picks import write_picks
from soilwave.processing import bandpass, dewow
from soilwave.provenance import software_version
from soilwave.scenario import DEMO_NOTE, DemoTruth, write_demo_data
from soilwave.timelapse import track_front, write_timelapse

__all__ = ["run_demo"]

CAUTIONS = """\
Cautions
- These are SYNTHETIC demo data: the numbers illustrate the method, not a site.
- Water content from GPR rests on a petrophysical relation: calibrate against cores or
  probes at your site before irrigation, engineering or regulatory decisions rest on it,
  and report the credible intervals, not only the medians.
- A GPR survey does not replace utility locating before digging; rules on radio emission
  for GPR differ by country. Follow local codes and licensed practice.
"""


def _find_data(data_dir, out: Path, echo) -> Path:
    if data_dir is not None:
        path = Path(data_dir)
        if not (path / "demo_manifest.toml").is_file():
            msg = f"{path}: no demo_manifest.toml; expected the folder written by soilwave.scenario"
            raise InputError(msg)
        return path
    here = Path.cwd() / "data_demo"
    if (here / "demo_manifest.toml").is_file():
        return here
    generated = out / "data_demo"
    if not (generated / "demo_manifest.toml").is_file():
        echo(f"no ./data_demo here; generating the invented demo data into {generated}")
        write_demo_data(generated)
    return generated


def _read_manifest(data: Path) -> dict:
    path = data / "demo_manifest.toml"
    try:
        manifest = tomllib.loads(path.read_text(encoding="utf-8"))
        reference = _dt.datetime.fromisoformat(manifest["demo"]["reference_time"])
        for s in manifest["surveys"]:
            stamp = _dt.datetime.fromisoformat(s["timestamp"])
            s["hours"] = round((stamp - reference).total_seconds() / 3600.0, 6)
    except (OSError, tomllib.TOMLDecodeError, KeyError, TypeError, ValueError) as exc:
        msg = f"{path}: not a valid demo manifest ({exc}); regenerate with soilwave.scenario"
        raise FileFormatError(msg) from exc
    return manifest


def _read_cores(path: Path):
    rows = [line for line in path.read_text(encoding="utf-8").splitlines() if line.strip()]
    rows = [line for line in rows if not line.lstrip().startswith("#")]
    table = list(csv.DictReader(io.StringIO("\n".join(rows))))
    try:
        eps = np.array([float(r["permittivity"]) for r in table])
        theta = np.array([float(r["water_content"]) for r in table])
    except (KeyError, ValueError) as exc:
        msg = f"{path}: expected numeric columns permittivity, water_content ({exc})"
        raise FileFormatError(msg) from exc
    return eps, theta


def _prepare(gather):
    f = float(gather.attrs["frequency_mhz"])
    return bandpass(dewow(gather), low_mhz=0.25 * f, high_mhz=2.5 * f)


def _q(da, q):
    return float(da.sel(quantile=q))


def _save_figure(fig, path: Path, overwrite: bool) -> Path:
    import matplotlib.pyplot as plt

    def writer(tmp):
        fig.savefig(tmp, dpi=110, bbox_inches="tight", format="png")

    atomic_write([(path, writer)], overwrite=overwrite)
    plt.close(fig)
    return path


def run_demo(
    out_dir="soilwave-demo-output",
    *,
    data_dir=None,
    seed: int = 0,
    overwrite: bool = False,
    progress: bool = True,
    echo=print,
) -> Path:
    """Run the whole soilwave job on the invented demo data.

    Parameters
    ----------
    out_dir : str or path-like
        Folder for results (NetCDF), figures (PNG), pick tables (CSV) and
        ``report.txt``; created if missing.
    data_dir : str or path-like, optional
        Demo data folder; default ``./data_demo`` if present, else the data are
        generated into ``out_dir/data_demo``.
    seed : int
        Master seed of every random draw.
    overwrite : bool
        Replace results of an earlier run in ``out_dir``.
    progress : bool
        Show progress bars.
    echo : callable
        Where to print progress lines.

    Returns
    -------
    pathlib.Path
        The report file.

    Examples
    --------
    >>> from soilwave.demo import run_demo
    >>> report = run_demo("demo-out", progress=False)  # doctest: +SKIP
    """
    import matplotlib

    if matplotlib.get_backend().lower() not in ("agg", "module://matplotlib_inline.backend_inline"):
        matplotlib.use("Agg")
    from soilwave.plot_gather import plot_picks
    from soilwave.plot_inversion import plot_corner, plot_profile, plot_traveltime_fit
    from soilwave.plot_timelapse import plot_front, plot_storage, plot_water_content_section

    start = time.perf_counter()
    out = Path(out_dir)
    out.mkdir(parents=True, exist_ok=True)
    report_path = out / "report.txt"
    if report_path.exists() and not overwrite:
        msg = (
            f"{report_path} exists: an earlier demo run is there; pass --overwrite or another --out"
        )
        raise OutputExistsError(msg)
    (out / "picks").mkdir(exist_ok=True)
    data = _find_data(data_dir, out, echo)
    manifest = _read_manifest(data)
    seeds = np.random.SeedSequence(seed).generate_state(4)
    truth = DemoTruth()
    lines = ["soilwave demo report", "=" * 20, DEMO_NOTE, f"soilwave {software_version()}", ""]
    written = []
    steps = tqdm(total=6, desc="soilwave demo", disable=not progress, unit="step")
    timings = {}
    mark = time.perf_counter()

    def done(name):
        nonlocal mark
        now = time.perf_counter()
        timings[name] = now - mark
        mark = now
        steps.update()

    # 1. calibration
    eps_c, theta_c = _read_cores(data / manifest["demo"]["calibration"])
    start_model = CRIM(porosity=0.40, eps_solid=5.0, temperature=15.0)
    cal = calibrate(start_model, eps_c, theta_c, free=("porosity",))
    model = cal.model
    lines += [
        "1. Site calibration (CRIM, porosity free, solid permittivity 5.0, water at 15 C)",
        f"   porosity {cal.estimate['porosity']:.3f} +- {cal.standard_error['porosity']:.3f}"
        f" from {cal.n_pairs} cores; residual sd {cal.rmse:.4f} m3/m3"
        f"   (invented truth: {truth.porosity:.3f})",
        "",
    ]
    done("calibration")

    # 2. picks on every multi-offset gather
    cmp_surveys = sorted(
        (s for s in manifest["surveys"] if s["kind"] == "cmp"), key=lambda s: s["hours"]
    )
    gathers, picks = {}, {}
    for s in tqdm(cmp_surveys, desc="picking gathers", disable=not progress, leave=False):
        g = _prepare(read_gather(data / s["file"]))
        gathers[s["hours"]] = g
        p = auto_pick(g, max_interfaces=2)
        picks[s["hours"]] = p
        path = out / "picks" / (Path(s["file"]).stem + "_picks.csv")
        written.append(write_picks(p, path, overwrite=overwrite))
    lines.append("2. Automatic picks (air, ground, reflections) per multi-offset gather")
    for h, p in picks.items():
        counts = {ph: int((p["phase"] == ph).sum()) for ph in ("air", "ground", "reflection")}
        n_int = int(p["interface"].max())
        lines.append(f"   {h:6.1f} h: {counts} interfaces found: {n_int}")
    lines.append("")
    done("picking")

    # 3. inversion of the survey before wetting (loam over sand)
    first = min(picks)
    result = invert(picks[first], seed=int(seeds[0]), model=model, progress=progress)
    stem = Path(cmp_surveys[0]["file"]).stem
    written.append(result.to_netcdf(out / f"inversion_{stem}.nc", overwrite=overwrite))
    wc = result.water_content(model)
    written.append(write_dataset(wc, out / f"water_content_{stem}.nc", overwrite=overwrite))
    figs = {
        f"fig_{stem}_picks.png": plot_picks(gathers[first], picks[first], result=result),
        f"fig_{stem}_traveltime_fit.png": plot_traveltime_fit(result),
        f"fig_{stem}_profile.png": plot_profile(result, model),
        f"fig_{stem}_corner.png": plot_corner(result),
    }
    for name, fig in figs.items():
        written.append(_save_figure(fig, out / name, overwrite))
    lines += [f"3. Layered-earth inversion of the {first:g} h gather (before wetting)"]
    lines += [result.table(model), ""]
    true_earth = truth.earth_at(max(first, 0.0))
    lines.append(
        "   invented truth: permittivity "
        + ", ".join(f"{e:.1f}" for e in true_earth.permittivity)
        + "; interface depths "
        + ", ".join(f"{d:.3f}" for d in true_earth.interface_depth)
        + " m; conductivity "
        + ", ".join(f"{c:g}" for c in true_earth.conductivity)
        + " mS/m (the synthetic data's spreading law near the antennas differs from the"
        + " inversion's amplitude model, a model error like those of real data)"
    )
    lines.append("")
    done("inversion")

    # 4. wetting front and infiltration
    front_picks = {}
    for h, p in picks.items():
        keep = p["phase"].isin(["air", "ground"])
        if h > 0:
            keep = keep | ((p["phase"] == "reflection") & (p["interface"] == 1))
        front_picks[h] = p.isel(pick=np.flatnonzero(keep.values))
    front = track_front(front_picks, seed=int(seeds[1]), model=model, progress=progress)
    written.append(write_timelapse(front, out / "wetting_front.nc", overwrite=overwrite))
    fit = fit_green_ampt(front, seed=int(seeds[2]), progress=progress)
    written.append(write_dataset(fit.samples, out / "green_ampt.nc", overwrite=overwrite))
    for name, obj in (
        ("fig_front.png", plot_front(front, fit=fit)),
        ("fig_storage.png", plot_storage(front)),
    ):
        written.append(_save_figure(obj, out / name, overwrite))
    lines.append("4. Wetting front (median and 90 % interval) and storage change")
    depths = dict(zip(truth.survey_hours, truth.front_depths(), strict=True))
    for t in front["time"].values:
        fd = front["front_depth"].sel(time=t)
        ds = front["storage_change"].sel(time=t)
        true = depths.get(round(float(t)), float("nan"))
        lines.append(
            f"   {float(t):6.1f} h: front {_q(fd, 0.5):.3f} m [{_q(fd, 0.05):.3f}, "
            f"{_q(fd, 0.95):.3f}] (truth {true:.3f}); storage change {_q(ds, 0.5):.1f} mm"
        )
    ks = fit.samples["saturated_conductivity"]
    psi = fit.samples["suction_head"]
    lines += [
        f"   Green-Ampt: Ks {float(ks.median()):.2f} cm/h "
        f"[{float(ks.quantile(0.05)):.2f}, {float(ks.quantile(0.95)):.2f}] "
        f"(truth {truth.saturated_conductivity_cm_h}); suction head {float(psi.median()):.1f} cm "
        f"[{float(psi.quantile(0.05)):.1f}, {float(psi.quantile(0.95)):.1f}] "
        f"(truth {truth.suction_head_cm})",
        "",
    ]
    done("wetting front")

    # 5. the line map
    line_surveys = [s for s in manifest["surveys"] if s["kind"] == "line"]
    line_picks = {}
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        for s in line_surveys:
            p = pick_line_arrivals(read_gather(data / s["file"]))
            line_picks[max(s["hours"], 0.0)] = p
            path = out / "picks" / (Path(s["file"]).stem + "_picks.csv")
            written.append(write_picks(p, path, overwrite=overwrite))
    line_wc = groundwave_water_content(line_picks, model=model, seed=int(seeds[3]))
    written.append(write_dataset(line_wc, out / "line_water_content.nc", overwrite=overwrite))
    fig = plot_water_content_section(line_wc)
    written.append(_save_figure(fig, out / "fig_line_water_content.png", overwrite))
    lines.append("5. Water content along the line (median over the line, per survey)")
    med = line_wc["water_content"].sel(quantile=0.5)
    for t in np.atleast_1d(line_wc["time"].values) if "time" in line_wc.dims else [None]:
        row = med.sel(time=t) if t is not None else med
        lines.append(
            f"   {float(t) if t is not None else 0:6.1f} h: median {float(row.median()):.3f}, "
            f"range {float(row.min()):.3f}-{float(row.max()):.3f} m3/m3"
        )
    lines.append("")
    done("line map")

    # 6. report
    spent = ", ".join(f"{k} {v:.0f} s" for k, v in timings.items())
    lines.append(f"Finished in {time.perf_counter() - start:.0f} s ({spent}). Files:")
    lines += [f"   {Path(p).relative_to(out)}" for p in written]
    lines += ["", CAUTIONS]
    write_text(report_path, "\n".join(lines), overwrite=overwrite)
    done("report")
    steps.close()
    echo("\n".join(lines))
    echo(f"report: {report_path}")
    return report_path
