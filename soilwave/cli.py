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


# --- subcommand: demo ---------------------------------------------------------


# --- subcommand: batch --------------------------------------------------------


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
