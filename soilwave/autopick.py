"""Automatic picking: first breaks and reflections on gathers, air and ground waves on lines.

Layer 2. :func:`auto_pick` turns a multi-offset gather (CMP or WARR) into a
pick table (:mod:`soilwave.picks`) ready for :func:`soilwave.invert`:

1. **Air wave.** A characteristic function marks the first arrival on every
   trace: the energy ratio (Coppens 1985, Geophys. Prospect. 33:1212-1231) of
   the energy in one period after a sample to the energy recorded up to it
   (plus a stabilising constant), or the STA/LTA ratio (short-term over
   long-term average of the squared amplitude; Allen 1978, value from memory).
   The constant is at least the energy of one period of noise at the
   gather's overall amplitude level (``1.4826 MAD`` of all samples, dominated
   by noise), so that noise at the start of a weak far trace does not look
   like an onset.
   Its maximum is an onset; the largest extremum within 1.5 periods after it
   is the arrival's main lobe. These times are held to the linear moveout
   of the air wave, ``t = x / c + dt0``: ``dt0`` is the median of the densest
   cluster of misfits (the misfit with most others within a quarter period,
   robust where the air wave is lost in noise on many traces) and traces more
   than a quarter period off the line are outliers; at least a quarter of the
   traces (and three) must fit.
2. **Ground wave.** The same, after muting everything before the air wave's
   main lobe plus 0.75 period; the line ``t = dt0 + x / v_1`` (through the
   air wave's intercept) is fitted robustly (densest cluster of slownesses,
   then least squares on the traces within a quarter period of the line).
3. **Noise.** The noise level ``sigma_n`` is the scaled median absolute
   deviation (``1.4826 MAD``) of the amplitudes recorded before the air wave
   (more than one period before its main lobe). With fewer than 32 such
   samples the last tenth of every trace is used instead.
4. **Reflections.** The semblance spectrum (:mod:`soilwave.semblance`) of the
   gather with everything above the ground wave muted gives candidate events
   ``(t0, V_rms)``. Each is followed across offsets phase-consistently: the
   largest extremum, within one period, of the stack of the first five traces
   where the event is separated from the other arrivals (summed along the
   predicted hyperbola) fixes the lobe and its polarity; on every next trace
   the extremum of the same sign is sought within a quarter period of the
   previous pick moved by the predicted moveout increment. Following stops
   where the event comes within ``merge_fraction`` periods of the ground
   wave, the air wave or another candidate event (the arrivals merge), where
   it is lost (more than ``max_gap`` traces in a row without an extremum
   above ``min_snr`` local noise levels) or where its lag behind the hyperbola
   changes by more than half a period. The local noise level is
   ``sqrt(sigma_n^2 + leak^2)``: ``leak`` is the envelope the air and ground
   waves still have at that time, their envelope amplitudes times the
   wavelet's normalised envelope at that lag (measured on the leading half of
   the strongest air-wave picks, taken as symmetric). Near offsets, where the
   ground wave is hundreds of noise levels strong, its tail would otherwise
   pass for a reflection; the semblance of the muted gather also has maxima
   there (the truncated ground wave). Events repeating another event's
   picks are dropped. The first ``max_interfaces`` events in time are
   numbered 1, 2, ... (the inversion numbers interfaces from the top, so a
   deeper event never takes the place of a shallower one).
5. **Weak reflections.** An event too weak to give ``min_traces`` picks trace
   by trace (below ``min_snr`` noise levels on most traces) is picked on
   partial stacks. The clear traces (as above) are summed along the
   hyperbola; if the stack's envelope reaches ``min_snr`` times its noise
   level ``sigma_n sqrt(n)``, the event's mean amplitude per trace ``a`` fixes
   the group size ``n_b = (1.5 min_snr sigma_n / a)^2`` (at least 2, at most
   all clear traces) at which a group stack is expected to reach 1.5
   ``min_snr`` noise levels. Each group of ``n_b`` neighbouring clear traces
   is stacked along the hyperbola, the extremum of the event's polarity is
   sought within a quarter period of the previous group's lag, and a group
   stack reaching ``min_snr`` local noise levels (``sqrt(n) sigma_n`` plus the
   summed ``leak`` of its traces) gives one pick at the group's mean
   offset (time: the hyperbola there plus the lag). Stacking ``n`` traces of
   white noise raises the signal-to-noise ratio by ``sqrt(n)`` (common
   practice), so such a pick's noise level is ``sigma_n / sqrt(n)`` and its
   amplitude the stack's envelope over ``n``. The semblance maximum (at
   least ``min_semblance``) is the detection; the stack test only drops
   events too weak to time (with ``min_semblance`` lowered well below its
   default, semblance maxima of noise can give single stacked picks).
   Fixed-offset profiles: :func:`pick_line_arrivals`.

Every pick sits on the main lobe (largest extremum) of its arrival, so all
phases refer to the same point of the wavelet. With ``align_air=True`` the
air-wave intercept ``dt0`` is subtracted from all times: the air wave then
arrives at ``x / c``, as the travel-time forward model assumes (time zero at
the transmitter firing).

Pick uncertainty (common practice, after the Cramer-Rao bound for timing a
wavelet of dominant period ``T`` in white noise)::

    sigma_t = max(T / (2 pi sqrt(SNR)), T / 10),   SNR = (A / sigma_n)^2

with ``A`` the envelope amplitude at the pick; ``T / 10`` is the optimistic end
of the usual one tenth to one quarter of a period (value from memory). The
envelope amplitude ``A`` is stored in the ``amplitude`` column and ``sigma_n``
in ``amplitude_sigma``.
"""

from __future__ import annotations

import warnings

import numpy as np
from scipy import signal

from soilwave.errors import InputError, RangeWarning
from soilwave.gather import history_line, sample_interval
from soilwave.picks import make_picks
from soilwave.semblance import _check_gather, _period_ns, pick_semblance, semblance
from soilwave.wave import SPEED_OF_LIGHT

__all__ = ["auto_pick", "first_breaks", "pick_line_arrivals"]

#: Pick sigma floor as a fraction of the dominant period (common practice).
SIGMA_FLOOR_FRACTION = 0.1

#: Smallest noise level as a fraction of the largest amplitude (a dynamic range
#: of 80 dB), so that noise-free synthetic gathers have a finite SNR.
DYNAMIC_RANGE_FLOOR = 1e-4

_METHODS = ("energy_ratio", "sta_lta")


# --- xarray layer -----------------------------------------------------------------


def _prepare(gather, func, period_ns, method):
    g = _check_gather(gather, "offset", func)
    if method not in _METHODS:
        msg = f"{func}: method must be one of {list(_METHODS)}; got {method!r}"
        raise InputError(msg)
    x = np.asarray(g["offset"].values, dtype=float)
    if np.any(x < 0):
        msg = f"{func}: offsets must be >= 0 m; got {x.tolist()}"
        raise InputError(msg)
    t = np.asarray(g["time"].values, dtype=float)
    period = _period_ns(g, period_ns)
    return g, x, t, sample_interval(g), period


def _first_break_picks(data, x, t, dt, period, method, min_snr):
    """Air and ground picks (numpy); returns a dict of arrays and fitted lines."""
    env = np.abs(signal.hilbert(data, axis=-1))
    air = _air_wave(data, x, t, dt, period, method, min_snr)
    noise = _noise_level(data, x, t, period, air["shift"] if air["found"] else None)
    ground = _ground_wave(data, x, t, dt, period, method, air, noise)
    out = {"air": air, "ground": ground, "noise": noise, "env": env}
    if not air["found"]:
        return out
    # drop air and ground picks where the two arrivals are closer than a period
    if ground["found"]:
        sep = x * (ground["slowness"] - 1.0 / SPEED_OF_LIGHT)
    else:
        sep = np.full(x.size, np.inf)
    merged = sep < period
    for key in ("air", "ground"):
        ph = out[key]
        if not ph["found"]:
            continue
        ok = ph["ok"] & ~merged & np.isfinite(ph["time"])
        amp = _envelope_at(env, t, dt, ph["time"])
        ok &= amp >= min_snr * noise
        ph["ok"] = ok
        ph["amplitude"] = amp
    return out


def first_breaks(gather, *, method="energy_ratio", period_ns=None, min_snr=3.0, align_air=True):
    """Pick the air wave and the ground wave on a multi-offset gather.

    See the module notes for the method. Picks where the air and ground waves
    lie within one period of each other (near offsets) are left out.

    Parameters
    ----------
    gather : xarray.DataArray
        Multi-offset gather, dims ``(offset, time)`` (m, ns).
    method : {"energy_ratio", "sta_lta"}, optional
        Characteristic function for the onsets.
    period_ns : float, optional
        Dominant period, ns. Default: from the data spectrum.
    min_snr : float, optional
        Smallest envelope amplitude of a pick in noise levels.
    align_air : bool, optional
        Subtract the air-wave intercept so the air wave arrives at ``x / c``.

    Returns
    -------
    xarray.Dataset
        Pick table (:func:`soilwave.make_picks`) with phases ``air`` and
        ``ground``; attributes ``time_shift_ns`` (air-wave intercept removed
        or found), ``ground_velocity`` (m/ns, NaN if not found),
        ``noise_level`` and ``period_ns``.

    Examples
    --------
    >>> import numpy as np
    >>> from soilwave.gather import gather_from_array
    >>> x = np.arange(1.0, 4.01, 0.2); t = np.arange(0, 60, 0.1)
    >>> def ricker(tt): u = np.pi * 0.2 * (t - tt[:, None]); return (1 - 2*u**2) * np.exp(-u**2)
    >>> data = ricker(x / 0.2998) + ricker(x / 0.1)
    >>> p = first_breaks(gather_from_array(data, offsets=x, dt_ns=0.1, frequency_mhz=200.0))
    >>> round(float(p.attrs["ground_velocity"]), 3)
    0.1
    """
    g, x, t, dt, period = _prepare(gather, "first_breaks", period_ns, method)
    data = np.asarray(g.values, dtype=float)
    fb = _first_break_picks(data, x, t, dt, period, method, float(min_snr))
    if not fb["air"]["found"]:
        msg = (
            "first_breaks: no air wave found (the first arrivals do not follow t = x/c + "
            "constant on at least half of the traces); check the offsets and time axis"
        )
        raise InputError(msg)
    shift = fb["air"]["shift"] if align_air else 0.0
    rows = _table_rows([], fb, period, shift)
    picks = _to_table(rows, g, fb["noise"])
    picks.attrs.update(_diagnostics(fb, period, shift))
    picks.attrs["history"] = _with_step(
        g, picks, "first_breaks", method=method, align_air=bool(align_air)
    )
    return picks


def _with_step(gather, picks, step, **kwargs):
    """Gather history, then the pick table's own lines, then this step."""
    lines = [str(gather.attrs.get("history", "") or ""), str(picks.attrs.get("history", ""))]
    lines.append(history_line(step, **kwargs))
    return "\n".join(line for line in lines if line)


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
        period (module notes), ``amplitude`` (envelope) and ``amplitude_sigma``
        (noise level, divided by ``sqrt(n)`` for picks on partial stacks of
        ``n`` traces). Attributes add ``time_shift_ns``, ``ground_velocity``,
        ``noise_level``, ``period_ns``, the semblance maxima used
        (``reflection_t0_ns``, ``reflection_v_rms``) and, per interface, the
        traces stacked per pick (``reflection_traces_per_pick``, 1 where the
        event was followed trace by trace).

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
    t0s, vs, n_stack = [], [], []
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
    rows = _table_rows(events, fb, period, shift)
    picks = _to_table(rows, g, fb["noise"])
    picks.attrs.update(_diagnostics(fb, period, shift))
    picks.attrs["reflection_t0_ns"] = np.asarray(t0s, dtype=float)
    picks.attrs["reflection_v_rms"] = np.asarray(vs, dtype=float)
    picks.attrs["reflection_traces_per_pick"] = np.asarray(n_stack, dtype=int)
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


def _diagnostics(fb, period, shift):
    return {
        "time_shift_ns": float(fb["air"]["shift"]),
        "time_shift_removed": int(shift != 0.0),
        "ground_velocity": (
            float(1.0 / fb["ground"]["slowness"]) if fb["ground"]["found"] else float("nan")
        ),
        "noise_level": float(fb["noise"]),
        "period_ns": float(period),
    }


def _table_rows(events, fb, period, shift):
    """Concatenate air, ground and reflection picks into column lists."""
    keys = ("offset", "time", "phase", "interface", "sigma", "amplitude", "amplitude_sigma")
    cols = {k: [] for k in keys}
    noise = fb["noise"]

    def add(x, tt, amp, phase, interface, n_stack=1):
        level = noise / np.sqrt(n_stack)
        cols["offset"].append(x)
        cols["time"].append(tt - shift)
        cols["phase"].append(np.full(x.size, phase))
        cols["interface"].append(np.full(x.size, interface))
        cols["sigma"].append(_pick_sigma(amp, level, period))
        cols["amplitude"].append(amp)
        cols["amplitude_sigma"].append(np.full(x.size, level))

    for phase in ("air", "ground"):
        ph = fb[phase]
        if ph["found"] and np.any(ph["ok"]):
            ok = ph["ok"]
            add(ph["x"][ok], ph["time"][ok], ph["amplitude"][ok], phase, 0)
    for k, ev in enumerate(events, start=1):
        add(ev["x"], ev["time"], ev["amplitude"], "reflection", k, ev["n_stack"])
    return cols


def _to_table(cols, g, noise):
    if not cols["offset"]:
        msg = "no air, ground or reflection arrival could be picked on this gather"
        raise InputError(msg)
    cat = {k: np.concatenate(v) for k, v in cols.items()}
    noise_sigma = cat["amplitude_sigma"]
    return make_picks(
        cat["offset"],
        cat["time"],
        cat["phase"],
        interface=cat["interface"].astype(int),
        sigma=cat["sigma"],
        frequency_mhz=float(g.attrs["frequency_mhz"]),
        amplitude=cat["amplitude"],
        amplitude_sigma=noise_sigma,
    )


_TIME_ZERO = ("line", "trace", "none")


def pick_line_arrivals(
    profile,
    *,
    antenna_separation=None,
    method="energy_ratio",
    period_ns=None,
    min_snr=3.0,
    time_zero="line",
    min_separation=1.0,
    survey_time=None,
):
    """Pick the air and ground wave on every trace of a fixed-offset profile.

    The air wave arrives at ``a / c`` after the transmitter fires (``a`` the
    antenna separation), the same on every trace; the direct ground wave at
    ``a / v_1``, which changes along the line with the near-surface water
    content. On each trace:

    1. **Air wave.** The characteristic-function onset (energy ratio or
       STA/LTA, as in :func:`first_breaks`) and the largest extremum within 1.5
       periods after it (the main lobe). The misfits ``t - a / c`` are held to
       their running median over 11 traces (densest cluster first, so traces
       where the air wave is lost do not pull it): a trace whose air pick is
       more than a quarter period off is not used. The polarity is the
       majority one; the final pick is the extremum of that sign within a
       quarter period of the running median.
    2. **Overlap test.** The median air wavelet of the line (one period
       around the main lobe) is the template; a trace whose air window differs
       from the scaled template by more than a quarter of the template's
       energy (plus four times the energy noise alone would leave) carries
       another arrival inside its air wave, usually a ground wave less than
       about one period behind, and is skipped.
    3. **Ground wave.** Onset after the air wave's main lobe plus 0.75
       period, then the largest extremum of the ground wave's majority
       polarity within 1.5 periods after the onset. No continuity along the
       line is imposed, so the ground wave may move by several periods from
       trace to trace (wet and dry patches).
    4. **Checks.** Both picks need an envelope of at least ``min_snr`` noise
       levels; the ground pick, sought over the rest of the trace, also at
       least the level noise alone exceeds there with probability 0.01
       (envelope of Gaussian noise: Rayleigh distributed, ``P(E > k sigma_n) =
       exp(-k^2 / 2)``, with about two independent values per period; about 4
       noise levels for 30 periods). The ground wave must arrive at least ``min_separation``
       periods after the air wave (the arrivals are taken as separable from
       one period on, common practice; see
       :func:`soilwave.groundwave_min_separation`). A trace failing any test
       gives no picks at all (neither air nor ground), and a
       :class:`~soilwave.errors.RangeWarning` names the skipped positions.

    The noise level of every trace is the scaled median absolute deviation
    (``1.4826 MAD``) of its samples before the air wave (more than one period
    before the main lobe); with fewer than 32 such samples, the pooled
    pre-air samples of all traces, else the last tenth of the traces. Pick
    uncertainty as in :func:`auto_pick`: ``sigma = max(T / (2 pi A /
    sigma_n), T / 10)``.

    Parameters
    ----------
    profile : xarray.DataArray
        Fixed-offset profile, dims ``(position, time)`` (m, ns).
    antenna_separation : float, optional
        Transmitter-receiver separation, m. Default the profile's
        ``antenna_separation_m`` attribute.
    method : {"energy_ratio", "sta_lta"}, optional
        Characteristic function for the onsets.
    period_ns : float, optional
        Dominant period, ns. Default: peak of the data's power spectrum.
    min_snr : float, optional
        Smallest envelope amplitude of a pick, in noise levels.
    time_zero : {"line", "trace", "none"}, optional
        ``"line"``: subtract one line-wide shift (median of the air-wave
        misfits ``t_air - a / c``), so the air wave arrives at ``a / c`` on
        average; ``"trace"``: subtract each trace's own air-wave misfit (time
        zero per trace; the air picks are then all ``a / c`` and keep their
        sigma); ``"none"``: times as recorded.
    min_separation : float, optional
        Smallest ground-minus-air arrival difference, in periods.
    survey_time : float, optional
        Elapsed time of the survey, h, stored in the ``survey_time`` column.

    Returns
    -------
    xarray.Dataset
        Pick table (:func:`soilwave.make_picks`) with one ``air`` and one
        ``ground`` pick per usable position: ``position`` (m), ``offset`` (the
        separation, m), ``time`` (ns), ``sigma`` (ns), ``amplitude``
        (envelope) and ``amplitude_sigma`` (noise level). Attributes
        ``time_shift_ns`` (line median of the air misfits), ``time_zero``,
        ``period_ns``, ``antenna_separation_m``, ``noise_level`` (median),
        ``skipped_positions`` (m) and ``history``.

    Warns
    -----
    RangeWarning
        When traces are skipped (overlapping arrivals, no air or ground wave).

    Examples
    --------
    >>> import numpy as np
    >>> from soilwave.gather import gather_from_array
    >>> pos = np.arange(0.0, 5.0, 0.5); t = np.arange(-5.0, 40.0, 0.1); c = 0.299792458
    >>> t_ground = np.sqrt(np.linspace(6.0, 20.0, pos.size)) / c  # 1 m separation
    >>> def ricker(tt): u = np.pi * 0.5 * (t - tt[:, None]); return (1 - 2*u**2) * np.exp(-u**2)
    >>> data = ricker(np.full(pos.size, 1.0 / c)) + 0.7 * ricker(t_ground)
    >>> prof = gather_from_array(data, positions=pos, dt_ns=0.1, t0_ns=-5.0,
    ...                          frequency_mhz=500.0, antenna_separation_m=1.0)
    >>> p = pick_line_arrivals(prof)
    >>> ground = p.time.values[p.phase.values == "ground"]
    >>> bool(np.all(np.abs(ground - t_ground) < 0.05))
    True
    """
    g = _check_gather(profile, "position", "pick_line_arrivals")
    if method not in _METHODS:
        msg = f"pick_line_arrivals: method must be one of {list(_METHODS)}; got {method!r}"
        raise InputError(msg)
    if time_zero not in _TIME_ZERO:
        msg = f"pick_line_arrivals: time_zero must be one of {list(_TIME_ZERO)}; got {time_zero!r}"
        raise InputError(msg)
    a = antenna_separation
    if a is None:
        a = g.attrs.get("antenna_separation_m")
        if a is None:
            msg = (
                "pick_line_arrivals: the profile has no 'antenna_separation_m' attribute; "
                "pass antenna_separation= (transmitter-receiver distance, m)"
            )
            raise InputError(msg)
    try:
        a = float(a)
    except (TypeError, ValueError):
        a = float("nan")
    if not (np.isfinite(a) and a > 0):
        msg = f"pick_line_arrivals: antenna separation must be > 0 m; got {a!r}"
        raise InputError(msg)
    for name, value in (("min_snr", min_snr), ("min_separation", min_separation)):
        if not (np.isfinite(float(value)) and float(value) >= 0):
            msg = f"pick_line_arrivals: {name} must be a number >= 0; got {value!r}"
            raise InputError(msg)
    pos = np.asarray(g["position"].values, dtype=float)
    t = np.asarray(g["time"].values, dtype=float)
    dt = sample_interval(g)
    period = _period_ns(g, period_ns)
    data = np.asarray(g.values, dtype=float)
    res = _line_arrivals(data, t, dt, a, period, method, float(min_snr), float(min_separation))
    if res is None:
        msg = (
            "pick_line_arrivals: no air wave found (the first arrivals are not at one time "
            f"near a/c = {a / SPEED_OF_LIGHT:.2f} ns plus a constant on at least a quarter of "
            "the traces); check the antenna separation and the time axis"
        )
        raise InputError(msg)
    ok = res["ok"]
    _warn_skipped(pos, res["reason"], period, min_separation)
    if not np.any(ok):
        msg = (
            f"pick_line_arrivals: no trace of {pos.size} has separable air and ground waves "
            "above the noise; see the warnings"
        )
        raise InputError(msg)
    shift_line = float(np.median(res["t_air"][ok] - a / SPEED_OF_LIGHT))
    if time_zero == "line":
        shift = np.full(pos.size, shift_line)
    elif time_zero == "trace":
        shift = res["t_air"] - a / SPEED_OF_LIGHT
    else:
        shift = np.zeros(pos.size)
    n = int(ok.sum())
    noise = res["noise"][ok]
    times = np.r_[res["t_air"][ok] - shift[ok], res["t_ground"][ok] - shift[ok]]
    amps = np.r_[res["a_air"][ok], res["a_ground"][ok]]
    picks = make_picks(
        np.full(2 * n, a),
        times,
        np.array(["air"] * n + ["ground"] * n),
        interface=0,
        sigma=_pick_sigma(amps, np.r_[noise, noise], period),
        frequency_mhz=float(g.attrs["frequency_mhz"]),
        amplitude=amps,
        amplitude_sigma=np.r_[noise, noise],
        position=np.r_[pos[ok], pos[ok]],
        survey_time=None if survey_time is None else float(survey_time),
    )
    picks.attrs.update(
        {
            "time_shift_ns": shift_line,
            "time_zero": time_zero,
            "period_ns": float(period),
            "antenna_separation_m": a,
            "noise_level": float(np.median(noise)),
            "skipped_positions": pos[~ok],
        }
    )
    picks.attrs["history"] = _with_step(
        g,
        picks,
        "pick_line_arrivals",
        antenna_separation=a,
        method=method,
        time_zero=time_zero,
        min_separation=float(min_separation),
    )
    return picks


_SKIP_REASONS = {
    "no_air": "no air wave above {snr} noise levels at the line's air-wave time",
    "overlap_air": "another arrival inside the air wave (air and ground waves overlap)",
    "no_ground": "no ground wave above {snr} noise levels after the air wave",
    "overlap": "ground wave less than {sep:g} period(s) after the air wave (overlap)",
}


def _warn_skipped(pos, reason, period, min_separation):
    for key in ("no_air", "overlap_air", "overlap", "no_ground"):
        bad = pos[reason == key]
        if bad.size == 0:
            continue
        shown = ", ".join(f"{p:g}" for p in bad[:12]) + (" ..." if bad.size > 12 else "")
        why = _SKIP_REASONS[key].format(snr="min_snr", sep=min_separation)
        msg = (
            f"pick_line_arrivals: skipped {bad.size} trace(s) ({why}; period {period:.3g} ns) "
            f"at positions [{shown}] m; they get no air or ground pick"
        )
        warnings.warn(msg, RangeWarning, stacklevel=3)


# --- numpy kernels ----------------------------------------------------------------


def _envelope_at(env, t, dt, times):
    """Envelope of trace i at times[i] (nearest sample); NaN where times is NaN."""
    out = np.full(times.size, np.nan)
    ok = np.isfinite(times)
    k = np.clip(np.rint((times[ok] - t[0]) / dt), 0, t.size - 1).astype(int)
    out[ok] = env[np.flatnonzero(ok), k]
    return out


def _pick_sigma(amplitude, noise, period):
    """``max(T / (2 pi A / sigma_n), T / 10)`` (module notes), ns."""
    amp = np.asarray(amplitude, dtype=float)
    with np.errstate(divide="ignore"):
        s = period * noise / (2.0 * np.pi * amp)
    return np.maximum(np.where(np.isfinite(s), s, period), SIGMA_FLOOR_FRACTION * period)


def _characteristic(data, dt, period, method, noise=0.0):
    """Energy ratio or STA/LTA of every trace (same shape as data).

    The stabilising constant added to the denominator is the larger of 1e-3 of
    the trace's mean energy per window and the energy of noise of standard
    deviation ``noise`` over one window (so that a muted or quiet stretch
    followed by noise does not look like an arrival). ``noise`` is a scalar or
    one value per trace.
    """
    noise = np.asarray(noise, dtype=float)
    if noise.ndim == 1:
        noise = noise[:, None]
    e = data**2
    n = data.shape[-1]
    c = np.concatenate([np.zeros((e.shape[0], 1)), np.cumsum(e, axis=-1)], axis=-1)
    k = np.arange(n)
    if method == "energy_ratio":
        w = max(2, round(period / dt))
        post = c[:, np.minimum(k + w, n)] - c[:, k]
        prior = c[:, k + 1]
        beta = np.maximum(1e-3 * c[:, -1:] / n * w, np.maximum(w * noise**2, 1e-300))
        return post / (prior + beta)
    ns = max(2, round(period / dt))
    nl = 5 * ns
    sta = (c[:, np.minimum(k + ns, n)] - c[:, k]) / ns
    lta = (c[:, k + 1] - c[:, np.maximum(k + 1 - nl, 0)]) / np.minimum(k + 1, nl)
    beta = np.maximum(1e-3 * c[:, -1:] / n, np.maximum(noise**2, 1e-300))
    return sta / (lta + beta)


def _subsample(y, k):
    """Sub-sample offset of the extremum of y at k (parabola through 3 samples)."""
    if 0 < k < y.size - 1:
        y0, y1, y2 = y[k - 1], y[k], y[k + 1]
        den = y0 - 2.0 * y1 + y2
        if den != 0:
            return float(np.clip(0.5 * (y0 - y2) / den, -0.5, 0.5))
    return 0.0


def _extremum(trace, lo, hi, sign=0):
    """Largest extremum (of ``sign * trace``; ``|trace|`` when sign is 0) in [lo, hi].

    Returns (fractional index, sign) or None when the largest value sits on
    the window edge (no interior extremum).
    """
    n = trace.size
    lo, hi = max(int(lo), 0), min(int(hi), n - 1)
    if hi - lo < 2:
        return None
    seg = trace[lo : hi + 1]
    y = np.abs(seg) if sign == 0 else sign * seg
    k = int(np.argmax(y))
    if k == 0 or k == seg.size - 1:
        return None
    s = sign if sign != 0 else (1 if seg[k] >= 0 else -1)
    return lo + k + _subsample(s * seg, k), s


def _onset_picks(data, t, dt, period, method, start_idx, noise=0.0, sign=0):
    """Main-lobe times after the characteristic-function onset, per trace (NaN if none).

    The main lobe is the largest extremum (of ``sign * trace`` when ``sign`` is
    +1 or -1) within 1.5 periods after the onset.
    """
    m, n = data.shape
    d = data.copy()
    for i in range(m):
        d[i, : max(0, min(n, int(start_idx[i])))] = 0.0
    cf = _characteristic(d, dt, period, method, noise)
    for i in range(m):
        cf[i, : max(0, min(n, int(start_idx[i])))] = 0.0
    onset = np.argmax(cf, axis=-1)
    w = round(1.5 * period / dt)
    times = np.full(m, np.nan)
    signs = np.zeros(m, dtype=int)
    for i in range(m):
        ex = _extremum(d[i], onset[i], onset[i] + w, sign)
        if ex is not None:
            times[i] = t[0] + ex[0] * dt
            signs[i] = ex[1]
    return times, signs


def _follow_line(data, t, dt, period, pred, sign):
    """Same-sign extremum within a quarter period of the predicted times."""
    m = data.shape[0]
    half = max(1, round(0.25 * period / dt))
    times = np.full(m, np.nan)
    for i in range(m):
        c = round((pred[i] - t[0]) / dt)
        ex = _extremum(data[i], c - half, c + half, sign)
        if ex is not None:
            times[i] = t[0] + ex[0] * dt
    return times


def _densest(values, half_width):
    """Centre of the densest cluster: the value with most others within half_width."""
    v = np.sort(np.asarray(values, dtype=float))
    counts = np.searchsorted(v, v + half_width, side="right") - np.searchsorted(
        v, v - half_width, side="left"
    )
    k = int(np.argmax(counts))
    best = v[np.abs(v - v[k]) <= half_width]
    return float(np.median(best))


def _majority_sign(signs):
    s = int(np.sign(np.sum(signs)))
    return s if s != 0 else 1


def _air_wave(data, x, t, dt, period, method, min_snr):
    m = x.size
    # the gather's overall amplitude level (1.4826 MAD of all samples, dominated
    # by noise in a gather of arrivals) stabilises the characteristic function,
    # so that noise at the start of a far trace does not look like an onset
    level = 1.4826 * float(np.median(np.abs(data - np.median(data))))
    times, signs = _onset_picks(data, t, dt, period, method, np.zeros(m), level)
    res = times - x / SPEED_OF_LIGHT
    ok = np.isfinite(res)
    out = {"found": False, "x": x, "shift": 0.0, "ok": np.zeros(m, bool), "time": times}
    need = max(3, m // 4)
    if ok.sum() < need:
        return out
    shift = _densest(res[ok], 0.25 * period)
    inl = ok & (np.abs(res - shift) < 0.25 * period)
    if inl.sum() < need:
        return out
    sign = _majority_sign(signs[inl])
    shift = float(np.median(res[inl]))
    pred = x / SPEED_OF_LIGHT + shift
    tt = _follow_line(data, t, dt, period, pred, sign)
    ok = np.isfinite(tt) & (np.abs(tt - pred) < 0.25 * period)
    # an air wave must stand out of the gather's overall amplitude level
    k = np.clip(np.rint((tt[ok] - t[0]) / dt), 0, t.size - 1).astype(int)
    if ok.sum() < need or np.median(np.abs(data[np.flatnonzero(ok), k])) < min_snr * level:
        return out
    return {"found": True, "x": x, "shift": shift, "ok": ok, "time": tt, "sign": sign}


def _ground_wave(data, x, t, dt, period, method, air, noise):
    m = x.size
    out = {
        "found": False,
        "x": x,
        "slowness": np.nan,
        "ok": np.zeros(m, bool),
        "time": np.full(m, np.nan),
    }
    if not air["found"]:
        return out
    shift = air["shift"]
    start = np.ceil((x / SPEED_OF_LIGHT + shift + 0.75 * period - t[0]) / dt)
    times, signs = _onset_picks(data, t, dt, period, method, start, noise)
    pos = np.isfinite(times) & (x > 0)
    if pos.sum() < 2:
        return out
    s_i = (times[pos] - shift) / x[pos]
    s = _densest(s_i, 0.25 * period / max(float(np.max(x[pos])), 1e-9))
    res = times - (shift + s * x)
    inl = pos & (np.abs(res) < 0.25 * period)
    if inl.sum() < max(2, m // 4):
        return out
    s = float(np.sum(x[inl] * (times[inl] - shift)) / np.sum(x[inl] ** 2))
    if s <= 1.0 / SPEED_OF_LIGHT:
        return out
    sign = _majority_sign(signs[inl])
    pred = shift + s * x
    tt = _follow_line(data, t, dt, period, pred, sign)
    ok = np.isfinite(tt) & (np.abs(tt - pred) < 0.25 * period)
    if ok.sum() >= 2:
        s = float(np.sum(x[ok] * (tt[ok] - shift)) / np.sum(x[ok] ** 2))
    return {"found": True, "x": x, "slowness": s, "ok": ok, "time": tt, "sign": sign}


def _noise_level(data, x, t, period, shift):
    """Robust noise standard deviation (1.4826 MAD) from pre-arrival samples.

    Floored at ``DYNAMIC_RANGE_FLOOR`` times the largest amplitude, so noise-free
    synthetic data behave like a recording with a finite dynamic range.
    """
    floor = DYNAMIC_RANGE_FLOOR * max(float(np.max(np.abs(data))), 1e-300)
    if shift is not None:
        limit = x / SPEED_OF_LIGHT + shift - period
        pre = data[t[None, :] < limit[:, None]]
        if pre.size >= 32:
            return max(1.4826 * float(np.median(np.abs(pre - np.median(pre)))), floor)
    n = data.shape[1]
    tail = data[:, n - max(4, n // 10) :].ravel()
    return max(1.4826 * float(np.median(np.abs(tail - np.median(tail)))), floor)


def _mute_above(data, x, t, fb, period):
    """Zero every sample before the ground wave plus 0.75 period (and the air wave)."""
    air, gr = fb["air"], fb["ground"]
    line = np.maximum(air["shift"] + gr["slowness"] * x, air["shift"] + x / SPEED_OF_LIGHT)
    keep = t[None, :] >= (line + 0.75 * period)[:, None]
    return np.where(keep, data, 0.0)


def _track_events(data, x, t, dt, period, fb, cand, min_snr, merge, max_gap, n_min):
    """Follow every candidate hyperbola; return accepted events (dicts)."""
    env = fb["env"]
    noise = fb["noise"]
    shift = fb["air"]["shift"]
    air_line = x / SPEED_OF_LIGHT + shift
    ground_line = shift + fb["ground"]["slowness"] * x
    t0c = np.asarray(cand["t0"].values, dtype=float)
    vc = np.asarray(cand["v_rms"].values, dtype=float)
    sc = np.asarray(cand["semblance"].values, dtype=float)
    hyper = [np.sqrt(t0c[k] ** 2 + (x / vc[k]) ** 2) for k in range(t0c.size)]
    leak = _leak_function(env, t, dt, period, noise, fb["air"], air_line, ground_line)
    events = []
    for k in range(t0c.size):
        h = hyper[k]
        others = [hyper[j] for j in range(t0c.size) if j != k]

        def clear(i, tt, others=others):
            """Is time tt on trace i clear of the air, ground and other events?"""
            d = min(abs(tt - ground_line[i]), abs(tt - air_line[i]))
            for o in others:
                d = min(d, abs(tt - o[i]))
            return d >= merge * period

        start = [i for i in range(x.size) if clear(i, h[i])]
        if not start:
            continue
        picks = _follow_event(
            data, env, t, dt, period, h, start, clear, noise, leak, min_snr, max_gap
        )
        if len(picks) >= n_min:
            idx = np.array(sorted(picks))
            tt = np.array([picks[i] for i in idx])
            amp = _envelope_at(env[idx], t, dt, tt)
            ev = {"x": x[idx], "idx": idx, "time": tt, "amplitude": amp, "n_stack": 1}
        else:
            # too weak to follow trace by trace: pick on partial stacks
            ev = _stacked_event(
                data, x, t, dt, period, h, start, clear, noise, leak, min_snr, max_gap
            )
        if ev is not None:
            ev.update(t0=float(t0c[k]), v_rms=float(vc[k]), semblance=float(sc[k]))
            events.append(ev)
    return _drop_duplicates(events, period)


def _follow_event(data, env, t, dt, period, h, start, clear, noise, leak, min_snr, max_gap):
    """Follow one hyperbola trace by trace from its first clear trace; {trace: time}."""
    half = max(1, round(0.25 * period / dt))
    i0 = start[0]
    # lobe and polarity from a partial stack of the first clear traces along
    # the hyperbola (more robust in noise than one trace)
    lag_sign = _stack_lobe(data, t, h, start[:5], period, dt)
    if lag_sign is None:
        return {}
    lag, sign = lag_sign
    c = round((h[i0] + lag - t[0]) / dt)
    ex = _extremum(data[i0], c - half, c + half, sign)
    if ex is None:
        return {}
    picks = {}
    tp = t[0] + ex[0] * dt
    if clear(i0, tp) and env[i0, round(ex[0])] >= min_snr * np.hypot(noise, leak(i0, tp)):
        picks[i0] = tp
    prev_i, prev_t = i0, tp
    lag0 = tp - h[i0]  # semblance t0 may be off by a constant: follow the drift
    gap = 0
    for i in range(i0 + 1, data.shape[0]):
        pred = prev_t + (h[i] - h[prev_i])
        if not clear(i, pred) or abs(pred - h[i] - lag0) > 0.5 * period:
            break
        cc = round((pred - t[0]) / dt)
        ex = _extremum(data[i], cc - half, cc + half, sign)
        good = ex is not None
        if good:
            tp = t[0] + ex[0] * dt
            good = env[i, round(ex[0])] >= min_snr * np.hypot(noise, leak(i, tp))
        if not good:
            gap += 1
            if gap > max_gap:
                break
            continue
        gap = 0
        picks[i] = tp
        prev_i, prev_t = i, tp
    return picks


def _stack_level(noise, leak, h, traces, lag):
    """Noise level of a stack along ``h + lag``: ``sqrt(n) sigma_n`` plus the
    summed tails of the air and ground waves (coherent, so added in amplitude)."""
    return np.sqrt(len(traces)) * noise + sum(leak(i, h[i] + lag) for i in traces)


def _leak_function(env, t, dt, period, noise, air, air_line, ground_line):
    """``leak(i, tt)``: envelope the air and ground waves of trace i leave at time tt.

    The wavelet's normalised envelope ``e(tau)`` is the median, over the five
    strongest air-wave picks, of the envelope before the main lobe (where
    nothing but noise precedes the air wave; the noise's mean square envelope
    ``2 sigma_n^2`` removed) divided by its value at the lobe; it is taken as
    symmetric, ``e(tau) = e(-|tau|)``, and zero beyond three periods. On
    trace i the air and ground waves of envelope amplitudes ``A_a`` and
    ``A_g`` (at their fitted lines) leave
    ``sqrt((A_a e(tt - t_a))^2 + (A_g e(tt - t_g))^2)``.
    """
    lags = np.arange(-3.0 * period, 0.5 * dt, dt)
    ok = np.flatnonzero(air["ok"] & np.isfinite(air["time"]))
    if ok.size == 0:
        return lambda i, tt: 0.0
    amp = _envelope_at(env[ok], t, dt, air["time"][ok])
    top = ok[np.argsort(-amp)[:5]]
    # the noise's own envelope (mean square 2 sigma_n^2) is removed
    rows = [
        np.sqrt(np.maximum(np.interp(air["time"][i] + lags, t, env[i]) ** 2 - 2 * noise**2, 0))
        / max(a, 1e-300)
        for i, a in zip(top, np.sort(amp)[::-1][:5], strict=True)
    ]
    shape = np.minimum(np.median(rows, axis=0), 1.0)
    a_air = _envelope_at(env, t, dt, air_line)
    a_ground = _envelope_at(env, t, dt, ground_line)

    def leak(i, tt):
        ea = np.interp(-abs(tt - air_line[i]), lags, shape, left=0.0)
        eg = np.interp(-abs(tt - ground_line[i]), lags, shape, left=0.0)
        return float(np.hypot(a_air[i] * ea, a_ground[i] * eg))

    return leak


def _stack(data, t, h, traces, lags):
    """Sum of the traces interpolated at ``h[i] + lags`` (zero outside the record)."""
    out = np.zeros(lags.size)
    for i in traces:
        out += np.interp(h[i] + lags, t, data[i], left=0.0, right=0.0)
    return out


def _stacked_event(data, x, t, dt, period, h, clear_idx, clear, noise, leak, min_snr, max_gap):
    """Pick a weak event on partial stacks of neighbouring traces (module notes)."""
    n_c = len(clear_idx)
    if n_c < 2:
        return None
    lags = np.arange(-2.0 * period, 2.0 * period + 0.5 * dt, dt)
    inner = np.abs(lags) <= period
    full = _stack(data, t, h, clear_idx, lags)
    env_full = np.abs(signal.hilbert(full))
    ex = _extremum(np.where(inner, full, 0.0), 0, lags.size - 1)
    if ex is None:
        return None
    k0 = round(ex[0])
    sign = ex[1]
    snr_trace = env_full[k0] / (noise * n_c)  # mean amplitude per trace over noise
    if snr_trace * np.sqrt(n_c) < min_snr:
        return None
    target = 1.5 * min_snr
    n_b = int(min(n_c, max(2, np.ceil((target / max(snr_trace, 1e-12)) ** 2))))
    groups = [clear_idx[j : j + n_b] for j in range(0, n_c, n_b)]
    if len(groups) > 1 and len(groups[-1]) < 0.5 * n_b:
        groups[-2] = groups[-2] + groups[-1]
        groups.pop()
    prev_lag = float(lags[k0] + _subsample(sign * full, k0) * dt)
    quarter = max(1, round(0.25 * period / dt))
    rows = []
    gap = 0
    for grp in groups:
        st = _stack(data, t, h, grp, lags)
        env = np.abs(signal.hilbert(st))
        c = round((prev_lag - lags[0]) / dt)
        ex = _extremum(st, c - quarter, c + quarter, sign)
        good = ex is not None
        if good:
            lag = float(lags[0] + ex[0] * dt)
            good = env[round(ex[0])] >= min_snr * _stack_level(noise, leak, h, grp, lag)
        if good:
            xc = float(np.mean(x[grp]))
            i_c = int(grp[int(np.argmin(np.abs(x[grp] - xc)))])
            tp = float(np.interp(xc, x[grp], h[grp])) + lag
            good = clear(i_c, tp)
        if not good:
            gap += 1
            if gap > max_gap:
                break
            continue
        gap = 0
        prev_lag = lag
        rows.append((xc, tp, env[round(ex[0])] / len(grp), i_c, len(grp)))
    if not rows:
        return None
    n_stack = min(r[4] for r in rows)
    return {
        "x": np.array([r[0] for r in rows]),
        "idx": np.array([r[3] for r in rows]),
        "time": np.array([r[1] for r in rows]),
        "amplitude": np.array([r[2] for r in rows]),
        "n_stack": n_stack,
    }


def _stack_lobe(data, t, h, traces, period, dt):
    """(lag ns, sign) of the largest extremum of the stack along ``h + lag``, |lag| <= T."""
    lags = np.arange(-period, period + 0.5 * dt, dt)
    stack = np.zeros(lags.size)
    for i in traces:
        stack += np.interp(h[i] + lags, t, data[i], left=0.0, right=0.0)
    ex = _extremum(stack, 0, lags.size - 1)
    if ex is None:
        return None
    return float(np.interp(ex[0], np.arange(lags.size), lags)), ex[1]


def _drop_duplicates(events, period):
    """Keep one of two events that follow the same lobe on most common traces."""
    events = sorted(events, key=lambda e: -e["semblance"])
    kept = []
    for ev in events:
        dup = False
        for other in kept:
            common, ia, ib = np.intersect1d(ev["idx"], other["idx"], return_indices=True)
            if (
                common.size
                and np.mean(np.abs(ev["time"][ia] - other["time"][ib]) < 0.5 * period) > 0.5
            ):
                dup = True
                break
        if not dup:
            kept.append(ev)
    return kept


# --- fixed-offset line kernels ----------------------------------------------------


def _running_nanmedian(values, half):
    """Median of the finite values within ``half`` traces on each side (NaN if none)."""
    v = np.asarray(values, dtype=float)
    padded = np.concatenate([np.full(half, np.nan), v, np.full(half, np.nan)])
    win = np.lib.stride_tricks.sliding_window_view(padded, 2 * half + 1)
    out = np.full(v.size, np.nan)
    have = np.isfinite(win).any(axis=1)
    out[have] = np.nanmedian(win[have], axis=1)
    return out


def _trace_noise(data, t, t_air, period):
    """Per-trace noise level (1.4826 MAD) before the air wave; fallbacks in the docstring."""
    m, n = data.shape
    floor = DYNAMIC_RANGE_FLOOR * max(float(np.max(np.abs(data))), 1e-300)
    ref = np.where(np.isfinite(t_air), t_air, np.nanmedian(t_air))
    pre = t[None, :] < (ref - period)[:, None]
    noise = np.full(m, np.nan)
    for i in range(m):
        if pre[i].sum() >= 32:
            d = data[i, pre[i]]
            noise[i] = 1.4826 * float(np.median(np.abs(d - np.median(d))))
    if np.any(~np.isfinite(noise)):
        pooled = data[pre]
        if pooled.size < 32:
            pooled = data[:, n - max(4, n // 10) :].ravel()
        fill = 1.4826 * float(np.median(np.abs(pooled - np.median(pooled))))
        noise = np.where(np.isfinite(noise), noise, fill)
    return np.maximum(noise, floor)


def _air_template_misfit(data, t, t_air, period, noise, usable):
    """Relative misfit of each trace's air window to the line's median air wavelet.

    Returns ``(misfit, allowed)``: the residual energy after fitting the scaled
    template, over the scaled template's energy, and the largest acceptable
    value (0.25 plus four times the ratio noise alone would give).
    """
    dt = t[1] - t[0]
    tau = np.arange(-0.5 * period, 0.5 * period + 0.5 * dt, dt)
    m = data.shape[0]
    win = np.full((m, tau.size), np.nan)
    for i in np.flatnonzero(np.isfinite(t_air)):
        win[i] = np.interp(t_air[i] + tau, t, data[i], left=0.0, right=0.0)
    misfit = np.full(m, np.inf)
    allowed = np.zeros(m)
    if not np.any(usable):
        return misfit, allowed
    tmpl = np.median(win[usable], axis=0)
    tt = float(tmpl @ tmpl)
    if tt <= 0:
        return misfit, allowed
    for i in np.flatnonzero(np.isfinite(t_air)):
        amp = float(win[i] @ tmpl) / tt
        fit_e = amp**2 * tt
        if fit_e <= 0:
            continue
        r = win[i] - amp * tmpl
        misfit[i] = float(r @ r) / fit_e
        allowed[i] = 0.25 + 4.0 * tau.size * noise[i] ** 2 / fit_e
    return misfit, allowed


def _false_alarm_level(n_periods, probability=0.01):
    """Envelope level, in noise levels, that noise alone exceeds with ``probability``.

    The envelope of Gaussian noise of standard deviation ``s`` is Rayleigh
    distributed, ``P(E > k s) = exp(-k^2 / 2)``; a search window of
    ``n_periods`` periods holds about ``2 n_periods`` independent envelope values
    (common practice: the envelope decorrelates over about half a period), so
    ``k = sqrt(2 ln(2 n_periods / probability))``.
    """
    n = np.maximum(2.0 * np.asarray(n_periods, dtype=float), 1.0)
    return np.sqrt(2.0 * np.log(n / probability))


def _line_arrivals(data, t, dt, a, period, method, min_snr, min_sep):
    """Air and ground picks on every trace of a fixed-offset profile (numpy).

    Returns None when no air wave is found, else a dict of per-trace arrays:
    ``t_air``, ``t_ground`` (ns, as recorded), ``a_air``, ``a_ground``
    (envelope), ``noise``, ``ok`` and ``reason`` (skip reason, '' if kept).
    """
    m = data.shape[0]
    env = np.abs(signal.hilbert(data, axis=-1))
    t_direct = a / SPEED_OF_LIGHT
    # 1. air wave: onsets, line-consistent misfits, majority polarity; the
    # line's overall amplitude level (1.4826 MAD of all samples, dominated by
    # noise where arrivals are short) stabilises the characteristic function
    # so that noise at the start of a record does not look like an onset
    level = 1.4826 * float(np.median(np.abs(data - np.median(data))))
    times, signs = _onset_picks(data, t, dt, period, method, np.zeros(m), level)
    res = times - t_direct
    fin = np.isfinite(res)
    need = max(3, m // 4)
    if fin.sum() < need:
        return None
    centre = _densest(res[fin], 0.25 * period)
    inl = fin & (np.abs(res - centre) < 0.25 * period)
    if inl.sum() < need:
        return None
    trend = _running_nanmedian(np.where(inl, res, np.nan), 5)
    trend = np.where(np.isfinite(trend), trend, float(np.median(res[inl])))
    inl = fin & (np.abs(res - trend) < 0.25 * period)
    sign = _majority_sign(signs[inl])
    t_air = _follow_line(data, t, dt, period, t_direct + trend, sign)
    noise = _trace_noise(data, t, t_air, period)
    a_air = _envelope_at(env, t, dt, t_air)
    reason = np.full(m, "", dtype=object)
    air_ok = np.isfinite(t_air) & (a_air >= min_snr * noise)
    # the air wave must also stand out of the line's overall amplitude level
    if air_ok.sum() < need or np.median(a_air[air_ok]) < min_snr * level:
        return None
    reason[~air_ok] = "no_air"
    # 2. overlap: air window unlike the line's median air wavelet
    misfit, allowed = _air_template_misfit(data, t, t_air, period, noise, air_ok)
    overlap_air = air_ok & (misfit > allowed)
    reason[overlap_air] = "overlap_air"
    # 3. ground wave after the air wave's main lobe plus 0.75 period
    ref = np.where(np.isfinite(t_air), t_air, t_direct + trend)
    start = np.ceil((ref + 0.75 * period - t[0]) / dt)
    tg, sg = _onset_picks(data, t, dt, period, method, start, noise)
    strong = np.isfinite(tg) & (_envelope_at(env, t, dt, tg) >= min_snr * noise)
    g_sign = _majority_sign(sg[strong & (reason == "")]) if np.any(strong) else 1
    tg, _ = _onset_picks(data, t, dt, period, method, start, noise, sign=g_sign)
    a_ground = _envelope_at(env, t, dt, tg)
    detect = np.maximum(min_snr, _false_alarm_level((t[-1] - start * dt - t[0]) / period))
    no_ground = (reason == "") & ~(np.isfinite(tg) & (a_ground >= detect * noise))
    reason[no_ground] = "no_ground"
    close = (reason == "") & (tg - t_air < min_sep * period)
    reason[close] = "overlap"
    ok = reason == ""
    return {
        "t_air": t_air,
        "t_ground": tg,
        "a_air": a_air,
        "a_ground": a_ground,
        "noise": noise,
        "ok": ok,
        "reason": reason.astype(str),
    }
