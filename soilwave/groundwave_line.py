"""Water content along a line from fixed-offset air- and ground-wave picks.

At a fixed antenna separation ``x`` the air wave arrives at ``t_air = t0 + x / c``
and the direct ground wave at ``t_ground = t0 + x / v``, so with the air wave as
the time reference (Huisman et al. 2003, Vadose Zone J. 2:476-491, review the
method) ::

    v = x / (t_ground - t_air + x / c)        eps = (c / v)^2 = (1 + c dt / x)^2

with ``dt = t_ground - t_air``. Uncertainty: the two picks' standard deviations
combine into ``dt ~ Normal(t_ground - t_air, sqrt(sigma_g^2 + sigma_a^2))``,
truncated to ``dt > 0`` (a permittivity below 1 is impossible); Monte Carlo
draws of ``dt`` give permittivity draws, which the petrophysical model turns
into water-content draws with one parameter draw per sample (shared by every
position and time of that sample, since the relation's error is systematic).

Separating the two waves
------------------------
The waves overlap when their arrival difference ``dt = x (sqrt(eps) - 1) / c``
is shorter than about one period ``T = 1000 / f`` ns of the pulse (common
practice). Positions where ``dt < period_fraction * T`` (default 1) are flagged
``separable = False`` and a :class:`~soilwave.errors.RangeWarning` states the
minimum separation ``x_min = period_fraction * T c / (sqrt(eps) - 1)``
(:func:`groundwave_min_separation`) at the permittivity found there.

Sampling depth
--------------
The depth the ground wave senses grows with wavelength; Galagedara et al.
(2005), Vadose Zone J. 4:1096-1106, relate it to wavelength (their
coefficients are not verified in our references). soilwave reports
``0.5 lambda = 0.5 v / f`` as an order-of-magnitude estimate, "of the order of
half a wavelength" (common practice, an approximation), in
:func:`groundwave_sampling_depth`.

Examples
--------
>>> import numpy as np
>>> import soilwave as sw
>>> c = 0.299792458
>>> pos = np.arange(5.0)
>>> eps = 9.0 + pos
>>> t_air = np.full(5, 1.5 / c)
>>> t_gr = 1.5 * np.sqrt(eps) / c
>>> picks = sw.make_picks(np.full(10, 1.5), np.r_[t_air, t_gr], ["air"] * 5 + ["ground"] * 5,
...                       sigma=0.2, position=np.r_[pos, pos], frequency_mhz=250)
>>> wc = sw.groundwave_water_content(picks, seed=0)
>>> wc["permittivity"].sel(quantile=0.5).values.round(1).tolist()
[9.0, 10.0, 11.0, 12.0, 13.0]
"""

from __future__ import annotations

import math
import warnings
from collections.abc import Mapping

import numpy as np
import xarray as xr
from scipy import stats

from soilwave.errors import InputError, RangeWarning, SoilwaveWarning
from soilwave.provenance import append_history
from soilwave.surveys import check_survey_set, survey_picks
from soilwave.wave import SPEED_OF_LIGHT

__all__ = [
    "groundwave_min_separation",
    "groundwave_sampling_depth",
    "groundwave_water_content",
]

QUANTILES = (0.05, 0.16, 0.5, 0.84, 0.95)
_STANDARD_NAME = "volume_fraction_of_condensed_water_in_soil"


def groundwave_min_separation(permittivity, frequency_mhz, *, period_fraction=1.0):
    """Smallest antenna separation at which air and ground waves are separated, m.

    ``x_min = period_fraction * T c / (sqrt(eps) - 1)`` with ``T = 1000 / f`` ns:
    the separation at which the arrival difference equals ``period_fraction``
    periods (one period is common practice).

    Parameters
    ----------
    permittivity : float or array_like
        Relative permittivity of the soil, > 1.
    frequency_mhz : float or array_like
        Antenna centre frequency, MHz.
    period_fraction : float
        Required arrival difference in periods (default 1).

    Returns
    -------
    float or numpy.ndarray
        ``x_min``, m (infinite for ``eps <= 1``).

    Examples
    --------
    >>> round(float(groundwave_min_separation(9.0, 250.0)), 3)
    0.6
    """
    eps = np.asarray(permittivity, float)
    f = np.asarray(frequency_mhz, float)
    if np.any(~(f > 0)):
        msg = f"frequency_mhz must be > 0 MHz; got {frequency_mhz!r}"
        raise InputError(msg)
    with np.errstate(divide="ignore", invalid="ignore"):
        out = np.where(
            eps > 1,
            period_fraction * (1000.0 / f) * SPEED_OF_LIGHT / (np.sqrt(eps) - 1.0),
            np.inf,
        )
    return out[()] if out.ndim == 0 else out


def groundwave_sampling_depth(permittivity, frequency_mhz):
    """Order-of-magnitude ground-wave sampling depth: half a wavelength, m.

    ``0.5 lambda = 0.5 c / (sqrt(eps) f)``; "of the order of half a wavelength"
    is common practice and an approximation (Galagedara et al. 2005 relate the
    sampling depth to wavelength; their coefficients are not verified here).

    Parameters
    ----------
    permittivity : float or array_like
        Relative permittivity, >= 1.
    frequency_mhz : float or array_like
        Antenna centre frequency, MHz.

    Returns
    -------
    float or numpy.ndarray
        Depth, m.

    Examples
    --------
    >>> round(float(groundwave_sampling_depth(9.0, 250.0)), 3)
    0.2
    """
    eps = np.asarray(permittivity, float)
    f = np.asarray(frequency_mhz, float)
    out = 0.5 * SPEED_OF_LIGHT / (np.sqrt(eps) * f * 1e-3)
    return out[()] if out.ndim == 0 else out


# --- pairing air and ground picks ---------------------------------------------------------


def _tables(lines):
    """Return a list of (time or None, pick table)."""
    if isinstance(lines, Mapping) and not isinstance(lines, xr.Dataset):
        try:
            items = sorted(((float(k), v) for k, v in lines.items()), key=lambda kv: kv[0])
        except (TypeError, ValueError):
            msg = f"line keys must be elapsed times in hours; got {list(lines)!r}"
            raise InputError(msg) from None
        for k, v in items:
            if not isinstance(v, xr.Dataset):
                msg = f"line at {k:g} h: expected a pick table; got {type(v).__name__}"
                raise InputError(msg)
        return items
    if isinstance(lines, xr.Dataset) and "travel_time" in lines and "n_picks" in lines:
        check_survey_set(lines)
        return [
            (float(lines["time"][i]), survey_picks(lines, i)) for i in range(lines.sizes["time"])
        ]
    if isinstance(lines, xr.Dataset):
        if "survey_time" in lines:
            st = np.asarray(lines["survey_time"].values, float)
            if np.all(np.isfinite(st)) and np.unique(st).size >= 1:
                return [(float(t), lines.isel(pick=np.flatnonzero(st == t))) for t in np.unique(st)]
        return [(None, lines)]
    msg = (
        "lines must be a pick table, a mapping of elapsed hours to pick tables, or a "
        f"survey set; got {type(lines).__name__}"
    )
    raise InputError(msg)


def _pair(table, when):
    """Air/ground pairs of one line: dict position -> (x, t_air, s_air, t_g, s_g)."""
    label = "line" if when is None else f"line at {when:g} h"
    if "position" not in table:
        msg = f"{label}: the pick table has no 'position' variable (m along the line)"
        raise InputError(msg)
    ph = np.asarray(table["phase"].values).astype(str)
    pos = np.asarray(table["position"].values, float)
    x = np.asarray(table["offset"].values, float)
    t = np.asarray(table["time"].values, float)
    s = np.asarray(table["sigma"].values, float)
    other = ~np.isin(ph, ("air", "ground"))
    if other.any():
        msg = (
            f"{label}: {int(other.sum())} pick(s) that are neither air nor ground waves are ignored"
        )
        warnings.warn(msg, SoilwaveWarning, stacklevel=4)
    out = {}
    for p in np.unique(pos[~other]):
        if not math.isfinite(p):
            msg = f"{label}: an air or ground pick has no position (NaN)"
            raise InputError(msg)
        ia = np.flatnonzero((pos == p) & (ph == "air"))
        ig = np.flatnonzero((pos == p) & (ph == "ground"))
        if ia.size != 1 or ig.size != 1:
            msg = (
                f"{label}, position {p:g} m: expected one air and one ground pick; got "
                f"{ia.size} air and {ig.size} ground (pick indices {np.r_[ia, ig].tolist()})"
            )
            raise InputError(msg)
        a, g = int(ia[0]), int(ig[0])
        if x[a] != x[g] or x[a] <= 0:
            msg = (
                f"{label}, position {p:g} m: air pick offset {float(x[a])!r} m and ground "
                f"pick offset {float(x[g])!r} m differ or are not > 0; expected one fixed "
                "separation"
            )
            raise InputError(msg)
        out[float(p)] = (x[a], t[a], s[a], t[g], s[g])
    if not out:
        msg = f"{label}: no air- and ground-wave picks"
        raise InputError(msg)
    return out


# --- main ----------------------------------------------------------------------------------


def groundwave_water_content(
    lines,
    *,
    model=None,
    frequency_mhz=None,
    n_draws=2000,
    seed=None,
    period_fraction=1.0,
    keep_samples=False,
) -> xr.Dataset:
    """Water content along a line (or repeated lines) from fixed-offset ground waves.

    Parameters
    ----------
    lines : xarray.Dataset or mapping
        A pick table with ``position`` (m) and one ``air`` and one ``ground`` pick
        per position (optionally ``survey_time`` for repeated lines); or a mapping
        elapsed hours -> such a table; or a survey set.
    model : soilwave.petro.PetroModel, optional
        Permittivity to water content relation (default :class:`soilwave.Topp`).
    frequency_mhz : float, optional
        Antenna centre frequency, MHz; default: the pick tables' ``frequency_mhz``.
    n_draws : int
        Monte Carlo draws per position and time (default 2000).
    seed : int, optional
        Seed of the Monte Carlo draws.
    period_fraction : float
        Arrival difference (in periods) below which the waves count as not
        separable (default 1, common practice).
    keep_samples : bool
        Keep the water-content draws as ``water_content_samples`` along ``sample``.

    Returns
    -------
    xarray.Dataset
        Over ``position`` (and ``time`` when there are several lines or survey
        times) and ``quantile``: ``water_content`` (1, CF standard name
        ``volume_fraction_of_condensed_water_in_soil``), ``water_content_mean``,
        ``water_content_sd``, ``permittivity``, ``velocity`` (m/ns); without
        ``quantile``: ``antenna_separation`` (m), ``arrival_difference`` (ns),
        ``separable`` (bool), ``min_separation`` (m), ``sampling_depth`` (m).

    Warns
    -----
    RangeWarning
        Where air and ground waves are closer than ``period_fraction`` periods.

    Examples
    --------
    See the module docstring.
    """
    from soilwave.petro import Topp

    model = Topp() if model is None else model
    if not (isinstance(n_draws, int | np.integer) and n_draws >= 10):
        msg = f"n_draws must be an integer >= 10; got {n_draws!r}"
        raise InputError(msg)
    tables = _tables(lines)
    f = frequency_mhz
    if f is None:
        fs = {float(t.attrs["frequency_mhz"]) for _, t in tables if "frequency_mhz" in t.attrs}
        if len(fs) > 1:
            msg = f"pick tables have different frequency_mhz {sorted(fs)}; pass frequency_mhz="
            raise InputError(msg)
        f = fs.pop() if fs else None
    if f is None or not float(f) > 0:
        msg = (
            f"frequency_mhz is needed to check that air and ground waves separate; got {f!r}; "
            "pass frequency_mhz= (antenna centre frequency, MHz)"
        )
        raise InputError(msg)
    f = float(f)
    pairs = [(when, _pair(tab, when)) for when, tab in tables]
    has_time = any(when is not None for when, _ in pairs)
    positions = np.unique(np.concatenate([np.fromiter(p.keys(), float) for _, p in pairs]))
    n_p, n_t = positions.size, len(pairs)
    arr = {k: np.full((n_p, n_t), np.nan) for k in ("x", "ta", "sa", "tg", "sg")}
    for j, (_, p) in enumerate(pairs):
        for pos, vals in p.items():
            i = int(np.searchsorted(positions, pos))
            for k, v in zip(("x", "ta", "sa", "tg", "sg"), vals, strict=True):
                arr[k][i, j] = v
    have = np.isfinite(arr["x"])
    mu = arr["tg"] - arr["ta"]
    sd = np.hypot(arr["sg"], arr["sa"])
    rng = np.random.default_rng(seed)
    mu_f = np.where(have, mu, 1.0)
    sd_f = np.where(have, sd, 1.0)
    a = (0.0 - mu_f) / sd_f
    dt = stats.truncnorm.rvs(
        np.broadcast_to(a, (n_draws, n_p, n_t)),
        np.inf,
        loc=mu_f,
        scale=sd_f,
        size=(n_draws, n_p, n_t),
        random_state=rng,
    )
    dt = np.maximum(dt, 1e-9)
    x_f = np.where(have, arr["x"], 1.0)
    eps = (1.0 + SPEED_OF_LIGHT * dt / x_f) ** 2
    theta = model.water_content_draws(eps[:, have], rng=rng)
    th = np.full(eps.shape, np.nan)
    th[:, have] = theta
    eps[:, ~have] = np.nan
    vel = SPEED_OF_LIGHT / np.sqrt(eps)

    def q(d):
        out = np.full((len(QUANTILES), n_p, n_t), np.nan)
        out[:, have] = np.quantile(d[:, have], QUANTILES, axis=0)
        return np.moveaxis(out, 0, -1)

    def stat(fn):
        out = np.full((n_p, n_t), np.nan)
        out[have] = fn(th[:, have], axis=0)
        return out

    eps_med = np.where(have, (1.0 + SPEED_OF_LIGHT * np.maximum(mu, 0) / x_f) ** 2, np.nan)
    period = 1000.0 / f
    separable = np.where(have, mu >= period_fraction * period, False)
    x_min = groundwave_min_separation(
        np.where(have, eps_med, 1.0), f, period_fraction=period_fraction
    )
    x_min = np.where(have, x_min, np.nan)
    bad = have & ~separable
    if bad.any():
        idx = np.argwhere(bad)
        i, j = (int(v) for v in idx[0])
        when = pairs[j][0]
        where = f"position {positions[i]:g} m" + ("" if when is None else f" at {when:g} h")
        msg = (
            f"air and ground waves arrive less than {period_fraction:g} period "
            f"({period_fraction * period:.3g} ns at {f:g} MHz) apart at {int(bad.sum())} "
            f"location(s) (first: {where}, difference {mu[i, j]:.3g} ns at separation "
            f"{arr['x'][i, j]:g} m); they cannot be separated reliably there. Minimum "
            f"separation at the permittivity found ({eps_med[i, j]:.3g}): "
            f"{x_min[i, j]:.3g} m (x_min = T c / (sqrt(eps) - 1))"
        )
        warnings.warn(msg, RangeWarning, stacklevel=2)

    dims = ("position", "time")
    wc_attrs = {"units": "1", "standard_name": _STANDARD_NAME}
    data = {
        "water_content": (
            (*dims, "quantile"),
            q(th),
            {**wc_attrs, "long_name": "volumetric water content (ground wave)"},
        ),
        "water_content_mean": (
            dims,
            stat(np.mean),
            {**wc_attrs, "long_name": "posterior mean water content"},
        ),
        "water_content_sd": (
            dims,
            stat(lambda d, axis: np.std(d, axis=axis, ddof=1)),
            {"units": "1", "long_name": "posterior standard deviation of water content"},
        ),
        "permittivity": (
            (*dims, "quantile"),
            q(eps),
            {"units": "1", "long_name": "relative permittivity"},
        ),
        "velocity": (
            (*dims, "quantile"),
            q(vel),
            {"units": "m/ns", "long_name": "ground-wave velocity"},
        ),
        "antenna_separation": (dims, arr["x"], {"units": "m", "long_name": "antenna separation"}),
        "arrival_difference": (
            dims,
            mu,
            {"units": "ns", "long_name": "ground-wave minus air-wave pick time"},
        ),
        "separable": (
            dims,
            separable,
            {"long_name": f"waves at least {period_fraction:g} period apart"},
        ),
        "min_separation": (
            dims,
            x_min,
            {"units": "m", "long_name": "minimum antenna separation at the permittivity found"},
        ),
        "sampling_depth": (
            dims,
            np.where(have, groundwave_sampling_depth(np.where(have, eps_med, 1.0), f), np.nan),
            {
                "units": "m",
                "long_name": "approximate ground-wave sampling depth (half a wavelength)",
            },
        ),
    }
    coords = {
        "position": ("position", positions, {"units": "m", "long_name": "position along the line"}),
        "quantile": ("quantile", np.asarray(QUANTILES)),
    }
    if keep_samples:
        data["water_content_samples"] = (("sample", *dims), th, {**wc_attrs})
        coords["sample"] = np.arange(n_draws)
    if has_time:
        coords["time"] = (
            "time",
            np.array([np.nan if w is None else w for w, _ in pairs]),
            {"units": "h", "long_name": "elapsed survey time"},
        )
    ds = xr.Dataset(data, coords=coords)
    if not has_time:
        ds = ds.isel(time=0, drop=True)
    attrs = {
        "title": "soilwave ground-wave water content",
        "Conventions": "CF-1.8",
        "frequency_mhz": f,
        "period_fraction": float(period_fraction),
        "petrophysical_model": repr(model),
        "method": "v = x / (t_ground - t_air + x / c); Monte Carlo over pick errors",
        "sampling_depth_note": (
            "half a wavelength, an order-of-magnitude approximation (common practice); "
            "Galagedara et al. (2005) relate sampling depth to wavelength"
        ),
        "caution": "moisture estimates need site calibration before decisions rest on them",
    }
    ds.attrs = append_history(
        attrs, "groundwave_water_content", n_draws=n_draws, seed=seed, model=repr(model)
    )
    return ds
