"""Regenerate the invented demo data set in this folder (synthetic; no real site).

Run from the repository root::

    python data_demo/make_demo_data.py

The scenario and every number in it live in :mod:`soilwave.scenario`; the
seed is fixed, so the files come out the same each time.
"""

from pathlib import Path

from soilwave.scenario import write_demo_data

if __name__ == "__main__":
    manifest = write_demo_data(Path(__file__).resolve().parent, overwrite=True)
    print(f"wrote the demo data set described by {manifest}")
