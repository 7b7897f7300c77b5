"""Point-scatterer diffraction hyperbolas on fixed-offset profiles.

Layer 2 (xarray on top of pure numpy kernels at the bottom of this module).

Diffraction hyperbolas
----------------------
On a fixed-offset profile with antenna separation ``a`` a point scatterer at
position ``x0`` and depth ``z`` below the antennas gives (straight rays, one
velocity ``v`` above the scatterer)::

    t(x) = (sqrt((x - a/2 - x0)^2 + z^2) + sqrt((x + a/2 - x0)^2 + z^2)) / v + t0

:func:`fit_diffraction` picks the envelope maxima along the hyperbola from its
apex outwards and fits ``v``, ``z`` and ``x0`` (optionally ``t0``) by
nonlinear least squares (:func:`scipy.optimize.least_squares`), each time
weighted by its envelope amplitude (the timing error of a wavelet in white
noise scales as 1 / amplitude); the standard errors come from the Jacobian
covariance ``s^2 (J^T W J)^-1`` with ``s^2`` the weighted RSS / (n - p).
"""

from __future__ import annotations

import numpy as np
import xarray as xr
from scipy import optimize, signal

from soilwave.errors import InputError
from soilwave.semblance import _check_gather, _history, _period_ns
from soilwave.wave import SPEED_OF_LIGHT

__all__ = ["fit_diffraction"]


# --- xarray layer -----------------------------------------------------------------


def fit_diffraction(
    profile,
    *,
    position_window=None,
    time_window=None,
    antenna_separation=None,
    t0=0.0,
    fit_t0=False,
    period_ns=None,
    min_snr=3.0,
):
    """Fit a point-scatterer diffraction hyperbola on a fixed-offset profile.

    The apex is the largest envelope value inside the windows; from there the
    envelope maximum is followed trace by trace to both sides (each search
    centred on the linear extrapolation of the last two picks, half a period
    wide) until it falls below ``min_snr`` times the noise level or leaves the
    window. The hyperbola (module notes) is fitted to these times.

    Parameters
    ----------
    profile : xarray.DataArray
        Fixed-offset profile with dims ``(position, time)``; positions in m,
        time in ns, time zero at the transmitter firing.
    position_window : (float, float), optional
        Positions (m) to use. Default: the whole profile.
    time_window : (float, float), optional
        Times (ns) in which the apex is sought and the event followed.
    antenna_separation : float, optional
        Transmitter-receiver separation ``a``, m. Default the profile's
        ``antenna_separation_m`` attribute, else 0.
    t0 : float, optional
        Time-zero offset of the hyperbola, ns (starting value when ``fit_t0``).
    fit_t0 : bool, optional
        Also fit ``t0`` (weakly determined; only with wide, clean hyperbolas).
    period_ns : float, optional
        Dominant period, ns. Default from the data spectrum.
    min_snr : float, optional
        Stop following the event where its envelope is below this multiple of
        the noise level (median absolute deviation of the window's amplitudes).

    Returns
    -------
    xarray.Dataset
        Scalars ``velocity`` (m/ns), ``depth`` (m), ``x0`` (m), ``t0`` (ns),
        ``permittivity`` (1), each with ``*_sigma``; ``rms_residual`` (ns); and
        along ``pick`` the fitted ``position`` (m), ``time`` (ns) and
        ``residual`` (ns).

    Examples
    --------
    >>> import numpy as np
    >>> from soilwave.gather import gather_from_array
    >>> x = np.arange(0, 4.01, 0.05); t = np.arange(0, 60, 0.2); a = 0.2
    >>> tt = (np.hypot(x - a / 2 - 2.0, 0.8) + np.hypot(x + a / 2 - 2.0, 0.8)) / 0.1
    >>> u = (t - tt[:, None]) * np.pi * 0.25
    >>> prof = gather_from_array((1 - 2 * u**2) * np.exp(-(u**2)), positions=x, dt_ns=0.2,
    ...                          frequency_mhz=250.0, antenna_separation_m=a)
    >>> fit = fit_diffraction(prof)
    >>> round(float(fit.velocity), 3), round(float(fit.depth), 2), round(float(fit.x0), 2)
    (0.1, 0.8, 2.0)
    """
    g = _check_gather(profile, "position", "fit_diffraction")
    x = np.asarray(g["position"].values, dtype=float)
    t = np.asarray(g["time"].values, dtype=float)
    dt = float(t[1] - t[0])
    if x.size < 5:
        msg = f"fit_diffraction: need at least 5 positions; got {x.size}"
        raise InputError(msg)
    if np.any(np.diff(x) == 0):
        msg = "fit_diffraction: positions must be distinct (sorted along the profile)"
        raise InputError(msg)
    order = np.argsort(x)
    x = x[order]
    data = np.asarray(g.values, dtype=float)[order]
    a = antenna_separation
    if a is None:
        a = g.attrs.get("antenna_separation_m", 0.0)
    a = float(a)
    if not np.isfinite(a) or a < 0:
        msg = f"fit_diffraction: antenna_separation must be >= 0 m; got {a!r}"
        raise InputError(msg)
    xw = (x[0], x[-1]) if position_window is None else tuple(map(float, position_window))
    tw = (t[0], t[-1]) if time_window is None else tuple(map(float, time_window))
    if len(xw) != 2 or xw[1] <= xw[0] or len(tw) != 2 or tw[1] <= tw[0]:
        msg = (
            "fit_diffraction: position_window and time_window must be (start, end) with "
            f"end > start; got {position_window!r}, {time_window!r}"
        )
        raise InputError(msg)
    xs = np.flatnonzero((x >= xw[0]) & (x <= xw[1]))
    ts = np.flatnonzero((t >= tw[0]) & (t <= tw[1]))
    if xs.size < 5 or ts.size < 4:
        msg = (
            f"fit_diffraction: the windows hold {xs.size} positions and {ts.size} samples; "
            "need at least 5 positions and 4 samples"
        )
        raise InputError(msg)
    period = _period_ns(g, period_ns)
    env = np.abs(signal.hilbert(data, axis=-1))
    sub = data[np.ix_(xs, ts)]
    noise = 1.4826 * float(np.median(np.abs(sub - np.median(sub))))
    px, pt, pa = _follow_diffraction(env, xs, ts, dt, float(t[0]), period, min_snr * noise)
    n_par = 4 if fit_t0 else 3
    if px.size < n_par + 2:
        msg = (
            f"fit_diffraction: only {px.size} points could be followed along the hyperbola; "
            f"need at least {n_par + 2} (widen position_window, or lower min_snr)"
        )
        raise InputError(msg)
    res = _fit_hyperbola(x[px], pt, a, float(t0), bool(fit_t0), weights=pa)
    names = ["velocity", "depth", "x0", "t0"]
    units = {"velocity": "m/ns", "depth": "m", "x0": "m", "t0": "ns"}
    long = {
        "velocity": "velocity above the scatterer",
        "depth": "scatterer depth below the antennas",
        "x0": "scatterer position along the profile",
        "t0": "time-zero offset of the hyperbola",
    }
    data_vars = {}
    for k, name in enumerate(names):
        data_vars[name] = ((), res["p"][k], {"units": units[name], "long_name": long[name]})
        data_vars[f"{name}_sigma"] = (
            (),
            res["sd"][k],
            {"units": units[name], "long_name": f"sd of {name}"},
        )
    vfit, vsd = res["p"][0], res["sd"][0]
    eps = (SPEED_OF_LIGHT / vfit) ** 2
    data_vars["permittivity"] = ((), eps, {"units": "1", "long_name": "relative permittivity"})
    data_vars["permittivity_sigma"] = (
        (),
        2.0 * eps * vsd / vfit,
        {"units": "1", "long_name": "sd of permittivity"},
    )
    data_vars["rms_residual"] = ((), res["rms"], {"units": "ns", "long_name": "rms residual"})
    data_vars["position"] = ("pick", x[px], {"units": "m", "long_name": "picked position"})
    data_vars["time"] = ("pick", pt, {"units": "ns", "long_name": "picked envelope maximum"})
    data_vars["residual"] = ("pick", res["resid"], {"units": "ns", "long_name": "fit residual"})
    return xr.Dataset(
        data_vars,
        attrs={
            "antenna_separation_m": a,
            "t0_fitted": int(bool(fit_t0)),
            "history": _history(g, "fit_diffraction", antenna_separation=a, fit_t0=bool(fit_t0)),
        },
    )


# --- numpy kernels ------------------------------------------------------------------


def _parabolic_peak(y, k):
    """Sub-sample offset (-0.5..0.5) of the extremum at index k of y."""
    if 0 < k < y.size - 1:
        y0, y1, y2 = y[k - 1], y[k], y[k + 1]
        den = y0 - 2.0 * y1 + y2
        if den != 0:
            return float(np.clip(0.5 * (y0 - y2) / den, -0.5, 0.5))
    return 0.0


def _follow_diffraction(env, xs, ts, dt, t_start, period, threshold):
    """Follow the envelope maximum from the apex outwards; (trace indices, times ns)."""
    sub = env[np.ix_(xs, ts)]
    ia, ja = np.unravel_index(np.argmax(sub), sub.shape)
    lo_t, hi_t = ts[0], ts[-1]
    half = max(1, round(0.5 * period / dt))

    def pick(trace, centre):
        c = round((centre - t_start) / dt)
        lo, hi = max(lo_t, c - half), min(hi_t, c + half)
        if hi - lo < 2:
            return None
        seg = env[trace, lo : hi + 1]
        k = int(np.argmax(seg))
        if k == 0 or k == seg.size - 1 or seg[k] < threshold:
            return None
        return t_start + (lo + k + _parabolic_peak(seg, k)) * dt

    apex_t = pick(xs[ia], t_start + (ts[ja]) * dt)
    if apex_t is None:
        return np.empty(0, dtype=int), np.empty(0), np.empty(0)
    picks = {int(xs[ia]): apex_t}
    amps = {int(xs[ia]): _env_value(env, xs[ia], apex_t, t_start, dt)}
    for direction in (-1, 1):
        prev = [apex_t]
        pos = ia + direction
        while 0 <= pos < xs.size:
            guess = prev[-1] + (prev[-1] - prev[-2] if len(prev) > 1 else 0.0)
            tp = pick(xs[pos], guess)
            if tp is None:
                break
            picks[int(xs[pos])] = tp
            amps[int(xs[pos])] = _env_value(env, xs[pos], tp, t_start, dt)
            prev.append(tp)
            pos += direction
    idx = np.array(sorted(picks), dtype=int)
    return idx, np.array([picks[i] for i in idx]), np.array([amps[i] for i in idx])


def _env_value(env, trace, time, t_start, dt):
    k = int(np.clip(round((time - t_start) / dt), 0, env.shape[1] - 1))
    return float(env[trace, k])


def _diffraction_time(x, v, z, x0, t0, a):
    return (np.hypot(x - a / 2 - x0, z) + np.hypot(x + a / 2 - x0, z)) / v + t0


def _fit_hyperbola(x, t, a, t0, fit_t0, weights=None):
    """Weighted least-squares fit of the finite-separation diffraction hyperbola.

    ``weights`` (envelope amplitudes) make each residual's standard deviation
    proportional to ``1 / amplitude``, as for a wavelet timed in white noise;
    the covariance is scaled by the reduced chi-square.
    """
    w = np.ones_like(t) if weights is None else np.asarray(weights, dtype=float)
    w = w / np.mean(w)
    ia = int(np.argmin(t))
    xa, ta = x[ia], t[ia]
    # start: t^2 = ta^2 + 4 (x - xa)^2 / v^2 (coincident antennas, t0 removed)
    tt = t - t0
    dx2 = (x - xa) ** 2
    slope = np.polyfit(dx2, tt**2, 1)[0] if np.ptp(dx2) > 0 else 4.0 / 0.1**2
    v_start = float(np.clip(2.0 / np.sqrt(slope), 0.02, SPEED_OF_LIGHT)) if slope > 0 else 0.1
    z_start = float(np.sqrt(max((v_start * (ta - t0) / 2.0) ** 2 - a**2 / 4.0, 1e-4)))
    p0 = [v_start, z_start, xa] + ([t0] if fit_t0 else [])

    def resid(p):
        tz = p[3] if fit_t0 else t0
        return w * (_diffraction_time(x, p[0], p[1], p[2], tz, a) - t)

    lo = [1e-3, 1e-4, -np.inf] + ([-np.inf] if fit_t0 else [])
    hi = [SPEED_OF_LIGHT, np.inf, np.inf] + ([np.inf] if fit_t0 else [])
    sol = optimize.least_squares(resid, p0, bounds=(lo, hi), x_scale="jac")
    r = sol.fun
    dof = max(1, r.size - len(p0))
    s2 = float(r @ r) / dof
    jtj = sol.jac.T @ sol.jac
    try:
        cov = s2 * np.linalg.inv(jtj)
        sd = np.sqrt(np.clip(np.diag(cov), 0.0, None))
    except np.linalg.LinAlgError:
        sd = np.full(len(p0), np.nan)
    p = list(sol.x) + ([] if fit_t0 else [t0])
    sd = list(sd) + ([] if fit_t0 else [0.0])
    raw = r / w
    return {
        "p": np.asarray(p, float),
        "sd": np.asarray(sd, float),
        "resid": raw,
        "rms": float(np.sqrt(np.mean(raw**2))),
    }
