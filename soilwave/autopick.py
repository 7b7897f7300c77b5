"""Automatic picking of a multi-offset gather: air, ground and reflected waves.

Layer 2. :func:`auto_pick` turns a multi-offset gather (CMP or WARR) into a
pick table (:mod:`soilwave.picks`) ready for :func:`soilwave.invert`. It
orchestrates three steps, each documented in its own module:

1. :mod:`soilwave.firstbreaks`: the air wave (linear moveout ``x / c``), the
   ground wave (``x / v_1``), the noise level and the pick uncertainty.
2. :mod:`soilwave.semblance`: the semblance spectrum of the gather with
   everything above the ground wave muted; its maxima are the candidate
   reflections ``(t0, V_rms)``.
3. :mod:`soilwave.reflection_picks`: every candidate is followed across
   offsets on its main lobe (or picked on partial stacks when weak) and
   stopped where its wavelet changes from the near-offset one (post-critical
   reflections beyond the critical distance under a faster layer, or the
   tails of the direct waves). The first ``max_interfaces`` events in time
   are numbered 1, 2, ... (the inversion numbers interfaces from the top, so
   a deeper event never takes the place of a shallower one).

Every pick sits on the main lobe (largest extremum) of its arrival, so all
phases refer to the same point of the wavelet. With ``align_air=True`` the
air-wave intercept ``dt0`` is subtracted from all times: the air wave then
arrives at ``x / c``, as the travel-time forward model assumes (time zero at
the transmitter firing).

Fixed-offset profiles: :func:`soilwave.pick_line_arrivals`
(:mod:`soilwave.line_picks`).
"""

from __future__ import annotations

import numpy as np

from soilwave.errors import InputError
from soilwave.firstbreaks import (
    _diagnostics,
    _first_break_picks,
    _prepare,
    _table_rows,
    _to_table,
    _with_step,
    first_breaks,
)
from soilwave.line_picks import pick_line_arrivals
from soilwave.reflection_picks import _mute_above, _track_events
from soilwave.semblance import pick_semblance, semblance

# first_breaks and pick_line_arrivals are re-exported for existing imports
__all__ = ["auto_pick", "first_breaks", "pick_line_arrivals"]


def auto_pick(
    gather,
    *,
    max_interfaces=3,
    method="energy_ratio",
    period_ns=None,
    velocities=None,
    min_semblance=None,
    min_snr=3.0,
    merge_fraction=0.75,
    min_traces=None,
    max_gap=2,
    align_air=True,
):
    """Pick air, ground and reflected waves on a multi-offset gather.

    Parameters
    ----------
    gather : xarray.DataArray
        Multi-offset gather (CMP or WARR), dims ``(offset, time)`` in m and ns.
    max_interfaces : int, optional
        Largest number of reflections (interfaces) returned: the first ones
        in time.
    method : {"energy_ratio", "sta_lta"}, optional
        Characteristic function of the first-break picker.
    period_ns : float, optional
        Dominant period, ns. Default: peak of the data's power spectrum.
    velocities : array_like, optional
        Trial RMS velocities of the semblance analysis, m/ns.
    min_semblance : float, optional
        Smallest semblance of a candidate reflection (see
        :func:`soilwave.pick_semblance`).
    min_snr : float, optional
        Smallest envelope amplitude of a pick, in noise levels.
    merge_fraction : float, optional
        A reflection is followed only while it stays at least this many
        periods away from the air wave, the ground wave and other reflections.
    min_traces : int, optional
        Fewest picks for a reflection to be kept. Default ``max(4, M // 5)``
        for ``M`` traces.
    max_gap : int, optional
        Traces in a row without a usable extremum before following stops.
    align_air : bool, optional
        Subtract the air-wave intercept so the air wave arrives at ``x / c``.

    Returns
    -------
    xarray.Dataset
        Pick table with phases ``air``, ``ground`` and ``reflection``
        (interfaces 1, 2, ... in time order), ``sigma`` from the SNR and
        period (:mod:`soilwave.firstbreaks`; for reflections the noise level
        includes the air- and ground-wave tails, :mod:`soilwave.reflection_picks`),
        ``amplitude`` (envelope) and ``amplitude_sigma`` (noise level, divided
        by ``sqrt(n)`` for picks on partial stacks of ``n`` traces).
        Attributes add ``time_shift_ns``, ``ground_velocity``,
        ``noise_level``, ``period_ns``, the semblance maxima used
        (``reflection_t0_ns``, ``reflection_v_rms``) and, per interface, the
        traces stacked per pick (``reflection_traces_per_pick``, 1 where the
        event was followed trace by trace) and the offset where the wavelet
        changed and picking stopped (``reflection_wavelet_change_offset_m``,
        m; NaN where it did not change).

    Examples
    --------
    >>> import numpy as np
    >>> from soilwave.gather import gather_from_array
    >>> x = np.arange(0.4, 4.01, 0.1); t = np.arange(0, 80, 0.1)
    >>> def ricker(tt): u = np.pi * 0.2 * (t - tt[:, None]); return (1 - 2*u**2) * np.exp(-u**2)
    >>> data = ricker(x / 0.2998) + ricker(x / 0.1) - 0.5 * ricker(np.hypot(30.0, x / 0.1))
    >>> p = auto_pick(gather_from_array(data, offsets=x, dt_ns=0.1, frequency_mhz=200.0))
    >>> sorted(set(p.phase.values.tolist())), int(p.interface.max())
    (['air', 'ground', 'reflection'], 1)
    """
    g, x, t, dt, period = _prepare(gather, "auto_pick", period_ns, method)
    max_interfaces = int(max_interfaces)
    if max_interfaces < 0:
        msg = f"auto_pick: max_interfaces must be >= 0; got {max_interfaces}"
        raise InputError(msg)
    if not 0.0 <= float(merge_fraction) <= 5.0:
        msg = f"auto_pick: merge_fraction must lie in [0, 5] periods; got {merge_fraction!r}"
        raise InputError(msg)
    if int(max_gap) < 0:
        msg = f"auto_pick: max_gap must be >= 0 traces; got {max_gap!r}"
        raise InputError(msg)
    data = np.asarray(g.values, dtype=float)
    fb = _first_break_picks(data, x, t, dt, period, method, float(min_snr))
    if not fb["air"]["found"]:
        msg = (
            "auto_pick: no air wave found (the first arrivals do not follow t = x/c + "
            "constant on at least half of the traces); check the offsets and time axis"
        )
        raise InputError(msg)
    shift = fb["air"]["shift"] if align_air else 0.0
    events = []
    t0s, vs, n_stack, changed = [], [], [], []
    if max_interfaces > 0 and fb["ground"]["found"]:
        muted = _mute_above(data, x, t, fb, period)
        gm = g.copy(data=muted)
        spec = semblance(gm, velocities=velocities)
        cand = pick_semblance(
            spec,
            n_max=3 * max_interfaces + 2,
            min_semblance=min_semblance,
            t0_min=fb["air"]["shift"] + period,
        )
        n_min = max(4, x.size // 5) if min_traces is None else int(min_traces)
        events = _track_events(
            data,
            x,
            t,
            dt,
            period,
            fb,
            cand,
            float(min_snr),
            float(merge_fraction),
            int(max_gap),
            n_min,
        )
        # interfaces are numbered from the top: keep the first events in time
        events = sorted(events, key=lambda e: e["t0"])[:max_interfaces]
        t0s = [e["t0"] - shift for e in events]
        vs = [e["v_rms"] for e in events]
        n_stack = [e["n_stack"] for e in events]
        changed = [e.get("change_offset", np.nan) for e in events]
    rows = _table_rows(events, fb, period, shift)
    picks = _to_table(rows, g, fb["noise"])
    picks.attrs.update(_diagnostics(fb, period, shift))
    picks.attrs["reflection_t0_ns"] = np.asarray(t0s, dtype=float)
    picks.attrs["reflection_v_rms"] = np.asarray(vs, dtype=float)
    picks.attrs["reflection_traces_per_pick"] = np.asarray(n_stack, dtype=int)
    picks.attrs["reflection_wavelet_change_offset_m"] = np.asarray(changed, dtype=float)
    picks.attrs["history"] = _with_step(
        g,
        picks,
        "auto_pick",
        max_interfaces=max_interfaces,
        method=method,
        merge_fraction=float(merge_fraction),
        align_air=bool(align_air),
    )
    return picks
