"""The ``soilwave`` command line.

Subcommands
-----------
``soilwave demo``
    Run the whole job on the bundled, invented demo data.
``soilwave invert PICKS.csv --out RESULT.nc``
    Bayesian layered-earth inversion of one pick table.

Each subcommand has an ``_add_<name>(subparsers)`` function that declares its
options and a ``_run_<name>(args)`` function that does the work; ``main``
wires them together. Errors from soilwave are printed as one line and give
exit status 2; nothing is written half-way.
"""

from __future__ import annotations

import argparse
import sys

from soilwave.errors import SoilwaveError

__all__ = ["main"]


# --- subcommand: invert -------------------------------------------------------


def _add_invert(subparsers) -> None:
    """Declare ``soilwave invert PICKS.csv --out RESULT.nc`` and its options."""
    p = subparsers.add_parser(
        "invert",
        help="Bayesian layered-earth inversion of a pick table",
        description=(
            "Infer layer permittivity, thickness and water content, with credible "
            "intervals, from travel times picked on a multi-offset gather. The number "
            "of interfaces is the highest interface in the picks. Water content from "
            "GPR needs site calibration before decisions rest on it."
        ),
    )
    p.add_argument("picks", metavar="PICKS.csv", help="pick table (CSV)")
    p.add_argument("--out", "-o", required=True, metavar="RESULT.nc", help="result file (NetCDF)")
    p.add_argument(
        "--seed", type=int, default=None, help="random seed (default: drawn and recorded)"
    )
    p.add_argument(
        "--frequency",
        type=float,
        default=None,
        metavar="MHZ",
        help="antenna frequency, MHz, for default pick uncertainties when sigma_ns is empty",
    )
    g = p.add_argument_group("water-content model")
    g.add_argument(
        "--water-model",
        choices=("topp", "crim"),
        default="topp",
        help="Topp et al. (1980) or CRIM (Birchak et al. 1974; Roth et al. 1990)",
    )
    g.add_argument("--porosity", type=float, default=None, help="CRIM porosity, m3/m3")
    g.add_argument(
        "--porosity-sd", type=float, default=0.0, help="standard deviation of the porosity"
    )
    g.add_argument(
        "--eps-solid", type=float, default=4.7, help="CRIM grain permittivity (default 4.7, quartz)"
    )
    g.add_argument(
        "--eps-water",
        type=float,
        default=None,
        help="CRIM pore-water permittivity (default from --temperature)",
    )
    g.add_argument("--temperature", type=float, default=None, help="soil temperature, C (CRIM)")
    g = p.add_argument_group("priors")
    g.add_argument(
        "--permittivity-prior",
        choices=("loguniform", "uniform"),
        default="loguniform",
        help="shape of the relative-permittivity prior (default loguniform)",
    )
    g.add_argument("--min-permittivity", type=float, default=1.0, help="default 1")
    g.add_argument("--max-permittivity", type=float, default=90.0, help="default 90")
    g.add_argument("--min-thickness", type=float, default=0.02, metavar="M", help="default 0.02 m")
    g.add_argument("--max-thickness", type=float, default=5.0, metavar="M", help="default 5 m")
    g.add_argument(
        "--time-zero",
        type=float,
        default=None,
        metavar="NS",
        help="centre of the time-zero prior, ns (default: from the air-wave picks)",
    )
    g.add_argument("--time-zero-sd", type=float, default=2.0, metavar="NS", help="default 2 ns")
    g.add_argument(
        "--fixed-noise",
        action="store_true",
        help="trust the pick sigmas as given (no pick-noise scale parameter)",
    )
    g = p.add_argument_group("sampler")
    g.add_argument("--walkers", type=int, default=32, help="emcee walkers (default 32)")
    g.add_argument("--max-steps", type=int, default=20000, help="step cap (default 20000)")
    p.add_argument("--overwrite", action="store_true", help="replace an existing result file")
    p.add_argument("--quiet", "-q", action="store_true", help="no progress bar or table")
    p.set_defaults(func=_run_invert)


def _run_invert(args) -> int:
    """Run ``soilwave invert``: read picks, invert, write the result, print a table."""
    import warnings
    from pathlib import Path

    from soilwave.errors import InputError, OutputExistsError
    from soilwave.inversion import invert
    from soilwave.picks import read_picks
    from soilwave.priors import Priors

    out = Path(args.out)
    if out.exists() and not args.overwrite:
        msg = f"output file {str(out)!r} exists; pass --overwrite to replace it"
        raise OutputExistsError(msg)
    if args.water_model == "crim":
        from soilwave.petro import CRIM, Uncertain

        if args.porosity is None:
            msg = "--water-model crim needs --porosity (m3/m3, between 0 and 1)"
            raise InputError(msg)
        porosity = (
            Uncertain(args.porosity, args.porosity_sd, low=0.0, high=1.0)
            if args.porosity_sd > 0
            else args.porosity
        )
        model = CRIM(
            porosity=porosity,
            eps_solid=args.eps_solid,
            eps_water=args.eps_water,
            temperature=args.temperature,
        )
    else:
        from soilwave.petro import Topp

        model = Topp()
    priors = Priors(
        permittivity_prior=args.permittivity_prior,
        permittivity_min=args.min_permittivity,
        permittivity_max=args.max_permittivity,
        min_thickness=args.min_thickness,
        max_thickness=args.max_thickness,
        time_zero_mean=args.time_zero,
        time_zero_sd=args.time_zero_sd,
        noise_scale_sd=None if args.fixed_noise else 0.5,
    )
    if not Path(args.picks).is_file():
        msg = f"pick table {args.picks!r} does not exist; expected a CSV file of picks"
        raise InputError(msg)
    picks = read_picks(args.picks, frequency_mhz=args.frequency)
    result = invert(
        picks,
        seed=args.seed,
        model=model,
        priors=priors,
        n_walkers=args.walkers,
        max_steps=args.max_steps,
        progress=not args.quiet,
    )
    with warnings.catch_warnings():
        if args.quiet:
            warnings.simplefilter("ignore")
        table = result.table()
    result.to_netcdf(out, overwrite=args.overwrite)
    if not args.quiet:
        d = result.diagnostics
        status = "converged" if d["converged"] else f"NOT converged ({d['reason']})"
        print(table)
        print(
            f"sampler: {d['n_steps']} steps x {d['n_walkers']} walkers, max tau "
            f"{float(d['tau'].max()):.1f}, min ESS {float(d['ess'].min()):.0f}, {status}; "
            f"seed {result.seed}"
        )
        print(f"wrote {out}")
    return 0


# --- subcommand: demo ---------------------------------------------------------


def _add_demo(sub) -> None:
    p = sub.add_parser(
        "demo",
        help="run the whole job on the bundled invented demo data",
        description=(
            "Process, pick and invert the invented demo gathers, follow the wetting front, "
            "fit Green-Ampt, map the line, and write NetCDF results, PNG figures and a report."
        ),
    )
    p.add_argument(
        "--out",
        default=None,
        help="output folder (default soilwave-demo-output, or the next free "
        "soilwave-demo-output-N when that holds an earlier run)",
    )
    p.add_argument("--data", default=None, help="demo data folder (default ./data_demo)")
    p.add_argument("--seed", type=int, default=0, help="master random seed (default 0)")
    p.add_argument("--overwrite", action="store_true", help="replace an earlier run's files")
    p.add_argument("--quiet", action="store_true", help="no progress bars")
    p.set_defaults(func=_run_demo)


def _run_demo(args) -> int:
    from pathlib import Path

    from soilwave.demo import run_demo

    out = args.out
    if out is None:
        out, n = Path("soilwave-demo-output"), 1
        while (out / "report.txt").exists() and not args.overwrite:
            n += 1
            out = Path(f"soilwave-demo-output-{n}")
    run_demo(
        out,
        data_dir=args.data,
        seed=args.seed,
        overwrite=args.overwrite,
        progress=not args.quiet,
    )
    return 0


# --- subcommand: batch --------------------------------------------------------


def _batch_option(text: str) -> tuple[str, object]:
    """Parse ``KEY=VALUE``; VALUE is a TOML literal (number, true/false, "text", [list])."""
    import tomllib

    key, sep, value = text.partition("=")
    key = key.strip()
    if not sep or not key.isidentifier():
        msg = f"{text!r}: expected KEY=VALUE, for example max_steps=2000"
        raise argparse.ArgumentTypeError(msg)
    try:
        parsed = tomllib.loads(f"v = {value.strip()}")["v"]
    except tomllib.TOMLDecodeError:
        parsed = value.strip()  # bare words are text: permittivity_prior=uniform
    return key, parsed


def _add_batch(subparsers) -> None:
    p = subparsers.add_parser(
        "batch",
        help="invert every pick table (and gather) in a folder, in parallel, resumably",
        description=(
            "Invert every pick table (*.csv) in INPUT_DIR, and with --gathers every recorded "
            "gather (*.nc, *.sgy, *.segy, or *.txt/*.csv with a .toml sidecar) after automatic "
            "picking, on a local process pool or a dask.distributed cluster. Each result is "
            "saved to OUT_DIR/results/<name>.nc as soon as it is done; running the same "
            "command again resumes where it stopped. Failed gathers are listed in "
            "OUT_DIR/failed/ and the summary. Exit status 1 when some gather failed. Moisture "
            "estimates need site calibration before decisions rest on them."
        ),
    )
    p.add_argument("input_dir", metavar="INPUT_DIR", help="folder of pick tables / gathers")
    p.add_argument("--out", required=True, metavar="OUT_DIR", help="output folder")
    p.add_argument(
        "--workers",
        type=int,
        default=None,
        metavar="N",
        help="local worker processes, one BLAS thread each (default: all cores; 0: no pool)",
    )
    p.add_argument(
        "--scheduler",
        metavar="ADDRESS",
        help="address of a running dask.distributed scheduler, e.g. tcp://host:8786",
    )
    p.add_argument("--seed", type=int, default=0, help="master seed (default 0)")
    p.add_argument(
        "--gathers", action="store_true", help="also auto-pick and invert recorded gathers"
    )
    p.add_argument(
        "--manifest",
        metavar="FILE",
        help="CSV with columns file, position_m, survey_time_h giving each input's place/time",
    )
    p.add_argument(
        "--invert-option",
        type=_batch_option,
        action="append",
        default=[],
        metavar="KEY=VALUE",
        help="inversion option (repeatable), e.g. max_steps=4000 or n_walkers=32",
    )
    p.add_argument(
        "--autopick-option",
        type=_batch_option,
        action="append",
        default=[],
        metavar="KEY=VALUE",
        help="automatic picking option for --gathers (repeatable)",
    )
    p.add_argument(
        "--keep-unconverged",
        action="store_true",
        help="keep results whose sampler did not converge (default: record them as failed)",
    )
    p.add_argument(
        "--overwrite",
        action="store_true",
        help="replace results made with other settings or from changed input files",
    )
    p.add_argument("--no-progress", action="store_true", help="no progress bar")
    p.set_defaults(func=_run_batch)


def _run_batch(args) -> int:
    from soilwave.batch import run_batch

    report = run_batch(
        args.input_dir,
        args.out,
        workers=args.workers,
        scheduler=args.scheduler,
        seed=args.seed,
        gathers=args.gathers,
        manifest=args.manifest,
        invert_options=dict(args.invert_option),
        autopick_options=dict(args.autopick_option),
        keep_unconverged=args.keep_unconverged,
        overwrite=args.overwrite,
        progress=not args.no_progress,
    )
    s = report.summary
    shown = s if len(s) <= 40 else s[s["status"] == "failed"]
    if len(shown):
        table = shown[["gather", "status", "converged", "ess_min", "seconds", "error"]].copy()
        table["error"] = table["error"].str.slice(0, 60)
        print(table.to_string(index=False, float_format=lambda v: f"{v:.3g}"))
    n_failed = len(report.failed)
    print(
        f"{len(s)} input(s): {report.n_done} done ({report.n_new} in this run), "
        f"{n_failed} failed. Summary: {report.out_dir / 'summary.csv'}"
    )
    if n_failed:
        print(f"failed: {', '.join(report.failed)} (details in {report.out_dir / 'failed'})")
    return 1 if n_failed else 0


def build_parser() -> argparse.ArgumentParser:
    """Return the argument parser of the ``soilwave`` command."""
    from soilwave import __version__

    parser = argparse.ArgumentParser(
        prog="soilwave",
        description="Soil water from ground-penetrating radar, with credible intervals.",
    )
    parser.add_argument("--version", action="version", version=f"soilwave {__version__}")
    sub = parser.add_subparsers(dest="command", required=True, metavar="COMMAND")
    for name, value in sorted(globals().items()):
        if name.startswith("_add_") and callable(value):
            value(sub)
    return parser


def main(argv: list[str] | None = None) -> int:
    """Entry point of the ``soilwave`` command; returns the exit status."""
    parser = build_parser()
    args = parser.parse_args(argv)
    try:
        return int(args.func(args) or 0)
    except SoilwaveError as exc:
        print(f"soilwave {args.command}: error: {exc}", file=sys.stderr)
        return 2
    except KeyboardInterrupt:
        print(f"soilwave {args.command}: interrupted", file=sys.stderr)
        return 130


if __name__ == "__main__":  # pragma: no cover
    sys.exit(main())
