"""Notebook tools for gathers, layer models, picks and inversion results (ipywidgets).

Import them from here (``import soilwave`` does not load ipywidgets)::

    from soilwave.widgets import GatherViewer, LayerModelExplorer, PickEditor, PosteriorExplorer

===========================  ================================================================
tool                         what it does
===========================  ================================================================
:class:`GatherViewer`        switch processing steps (time zero, dewow, band-pass, gain,
                             normalisation) and the display (image or wiggle, clip) of a
                             gather
:class:`LayerModelExplorer`  sliders for layer permittivity, thickness and time zero, with
                             the predicted air, ground, reflected and head-wave arrivals
                             over the gather, a table of velocities, depths and water
                             content, and the misfit to picks
:class:`PickEditor`          add, move and delete picks by clicking on the gather (or with
                             the form), then save the pick table as CSV
:class:`PosteriorExplorer`   histogram and depth profile with credible bands of any
                             posterior quantity of an :class:`~soilwave.InversionResult`
===========================  ================================================================

Each tool has a ``widget`` attribute (an ipywidgets container) and shows
itself when it is the last expression of a notebook cell. Its state is held
in plain attributes (``processed``, ``model``, ``curves``, ``picks``,
``stats`` ...) that code can read after the user has moved the controls.

Figures are clickable when matplotlib's ipympl backend is active (run
``%matplotlib widget`` first; ipympl comes with ``pip install
"soilwave[notebook]"``) or when a tool is made with ``interactive=True``.
Otherwise each figure is a static image that is re-rendered whenever a
control changes, and the pick editor's form replaces clicking.

Examples
--------
>>> from soilwave.synthetic import synthetic_gather
>>> from soilwave.widgets import LayerModelExplorer
>>> g = synthetic_gather({"permittivity": [9.0, 16.0], "thickness": [0.6]},
...                      offsets=[0.5, 1.0, 1.5, 2.0], dt_ns=0.2, n_samples=300,
...                      frequency_mhz=250.0)
>>> ex = LayerModelExplorer(g, permittivity=[9.0, 16.0], thickness=[0.6], interactive=False)
>>> sorted(ex.curves)
[('air', 0), ('ground', 0), ('reflection', 1)]
"""

from soilwave.widgets_figure import FigurePane, interactive_backend_active
from soilwave.widgets_gather import GatherViewer
from soilwave.widgets_model import LayerModelExplorer
from soilwave.widgets_picks import PickEditor
from soilwave.widgets_posterior import PosteriorExplorer

__all__ = [
    "FigurePane",
    "GatherViewer",
    "LayerModelExplorer",
    "PickEditor",
    "PosteriorExplorer",
    "interactive_backend_active",
]
