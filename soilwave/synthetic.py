"""Synthetic multi-offset GPR gathers from a layered earth.

Fixed-offset profiles with curved interfaces and diffractors are in
:mod:`soilwave.synthetic_profile`; they share the amplitude model below.

Seedable forward modelling for tests, examples and the demo data. Every
arrival is placed at its exact travel time (ray theory, see
:mod:`soilwave.traveltime`) with an amplitude built from the factors below;
the wavelet (Ricker by default, :mod:`soilwave.wavelets`) is evaluated
analytically at ``t - t_arrival``, so fractional delays are exact.

Amplitude model
---------------
Amplitudes are relative (dimensionless, ``units="1"``) and are the product of

* a per-phase scale (``phase_scale``, default 1 for every phase);
* geometric spreading (``spreading=True``):

  - air and ground wave, along the surface: ``1 / (x^2 + x_n^2)`` with ``x``
    the antenna separation in m, i.e. the ``1/x^2`` far-field decay of waves
    guided along the air-ground interface (Annan, value from memory) with a
    near-field cap ``x_n`` of half a wavelength in layer 1 at the centre
    frequency (our modelling choice, so zero offset stays finite);
  - reflections: ``1 / L`` with ``L`` the total ray path length in m
    (spherical spreading; the focusing by layer refraction is ignored);
  - head waves (refractions): the critical reflection's ``1 / L_c`` times
    ``(x_c / x)^2`` beyond the critical distance ``x_c`` (the ``x^-2`` decay
    of head waves far from ``x_c``; the amplitude near ``x_c`` is
    approximate);
  - point diffractors: ``s / (r_s r_r)`` with the one-way path lengths from
    transmitter and to receiver in m and the scattering strength ``s`` in m;

* the TE Fresnel reflection coefficient at the angle of incidence
  (:func:`soilwave.fresnel.fresnel_coefficients`), complex beyond the
  critical angle, and the TE transmission coefficients down and up through
  every interface above (``1 - r^2`` per interface pair at the same angles);
* attenuation ``exp(-sum_j alpha_j L_j)`` (``attenuation=True``) with
  ``alpha_j`` the plane-wave attenuation of layer ``j`` at the antenna
  centre frequency (:func:`soilwave.wave.attenuation`, from the model's
  conductivity) and ``L_j`` the path length in layer ``j``; the air wave is
  not attenuated.

Sign convention: with the TE coefficient a wave entering a medium of higher
permittivity is reflected with negative polarity (``R < 0`` at normal
incidence), relative to the positive air and ground waves. Complex
coefficients (total reflection) use the time factor ``exp(-i omega t)`` of
:mod:`soilwave.fresnel`, so on the trace (Fourier convention ``exp(+2 pi i f
t)``, as numpy's) the coefficient acts as ``conj(A)`` on positive frequencies
and the wavelet becomes ``Re(A) w(t) + Im(A) H[w](t)``, with ``H`` the
Hilbert transform; the returned arrivals hold ``amplitude = Re(A)`` and
``amplitude_quadrature = -Im(A)`` so that the trace is
``amplitude * w - amplitude_quadrature * H[w]``.

Not modelled: antenna radiation patterns, dispersion, multiples, caustic
phase shifts, interface dip in the transmission above a curved interface.

Noise: white Gaussian with standard deviation ``noise`` times the peak
absolute amplitude of the noise-free record, drawn from ``rng``.
"""

from __future__ import annotations

from collections.abc import Mapping

import numpy as np
import xarray as xr

from soilwave.earth import LayeredEarth
from soilwave.errors import InputError
from soilwave.fresnel import fresnel_coefficients
from soilwave.gather import gather_from_array
from soilwave.provenance import history_line
from soilwave.traveltime import head_wave_time, reflection_rays
from soilwave.wave import SPEED_OF_LIGHT
from soilwave.wavelets import shifted_wavelet_sum

__all__ = ["synthetic_gather"]

GATHER_PHASES = ("air", "ground", "reflection", "refraction")
PROFILE_PHASES = ("air", "ground", "reflection", "diffraction")


# --- argument checks -------------------------------------------------------------------


def _phases(include, allowed) -> tuple[str, ...]:
    if isinstance(include, str):
        include = (include,)
    inc = tuple(include)
    bad = [p for p in inc if p not in allowed]
    if bad:
        msg = f"include has unknown phase(s) {bad}; expected some of {list(allowed)}"
        raise InputError(msg)
    return inc


def _scales(phase_scale, allowed) -> dict:
    scales = dict.fromkeys(allowed, 1.0)
    if phase_scale is None:
        return scales
    if not isinstance(phase_scale, Mapping):
        msg = f"phase_scale must be a mapping phase -> factor; got {phase_scale!r}"
        raise InputError(msg)
    for key, value in phase_scale.items():
        if key not in allowed:
            msg = f"phase_scale has unknown phase {key!r}; expected some of {list(allowed)}"
            raise InputError(msg)
        x = float(value)
        if not np.isfinite(x):
            msg = f"phase_scale[{key!r}] must be finite; got {value!r}"
            raise InputError(msg)
        scales[key] = x
    return scales


def _time_axis(dt_ns, n_samples, t0_ns) -> np.ndarray:
    if isinstance(n_samples, bool) or not isinstance(n_samples, int | np.integer) or n_samples < 2:
        msg = f"n_samples must be an integer >= 2; got {n_samples!r}"
        raise InputError(msg)
    dt = float(dt_ns)
    if not (np.isfinite(dt) and dt > 0):
        msg = f"dt_ns must be finite and > 0 ns; got {dt_ns!r}"
        raise InputError(msg)
    return float(t0_ns) + dt * np.arange(int(n_samples))


def _wavelet(wavelet, frequency_mhz):
    f = float(frequency_mhz)
    if not (np.isfinite(f) and f > 0):
        msg = f"frequency_mhz must be finite and > 0 MHz; got {frequency_mhz!r}"
        raise InputError(msg)
    if isinstance(wavelet, str):
        if wavelet != "ricker":
            msg = f"wavelet must be 'ricker' or a sampled array; got {wavelet!r}"
            raise InputError(msg)
        return None
    return np.asarray(wavelet, dtype=float)


def _rng(rng):
    try:
        return np.random.default_rng(rng)
    except (TypeError, ValueError):
        msg = f"rng must be None, an integer seed or a numpy Generator; got {rng!r}"
        raise InputError(msg) from None


def _noise_level(noise) -> float:
    x = float(noise)
    if not (np.isfinite(x) and x >= 0):
        msg = f"noise must be >= 0 (standard deviation relative to the peak); got {noise!r}"
        raise InputError(msg)
    return x


# --- amplitude factors -------------------------------------------------------------------


def _surface_spreading(x, x_near):
    return 1.0 / (np.asarray(x, dtype=float) ** 2 + x_near**2)


def _transmission_down_up(eps, sin_theta, k):
    """Product of TE transmission down and up through interfaces 1..k-1."""
    total = np.ones(sin_theta.shape[:-1], dtype=complex)
    ang = np.rad2deg(np.arcsin(np.clip(sin_theta, 0.0, 1.0)))
    for j in range(k - 1):
        _, t_down = fresnel_coefficients(eps[j], eps[j + 1], ang[..., j])
        _, t_up = fresnel_coefficients(eps[j + 1], eps[j], ang[..., j + 1])
        total = total * t_down * t_up
    return total


def _layered_reflection(model, offsets, thickness, k, alpha, *, spreading, attenuation):
    """Times and complex amplitudes of the reflection from interface k (1-based).

    ``thickness`` may carry a leading batch axis (one model per trace); then
    ``offsets`` has one entry and results have shape (n_batch,).
    """
    eps = model.permittivity
    v = model.velocity
    t, p = reflection_rays(offsets, thickness, v, interface=k)
    batch = thickness.ndim > 1
    if batch:
        t, p = t[:, 0], p[:, 0]
    sin_t = p[:, None] * v[None, : k + 1]
    sin_t = np.where(np.isfinite(sin_t), sin_t, 0.0)
    cos_t = np.sqrt(np.clip(1.0 - sin_t[..., :k] ** 2, 0.0, None))
    h = np.atleast_2d(thickness)[..., :k]
    lengths = 2.0 * h / np.maximum(cos_t, 1e-300)
    total = lengths.sum(axis=-1)
    ang_k = np.rad2deg(np.arcsin(np.clip(sin_t[..., k - 1], 0.0, 1.0)))
    r, _ = fresnel_coefficients(eps[k - 1], eps[k], ang_k)
    amp = r * _transmission_down_up(eps, sin_t, k)
    if spreading:
        amp = amp / total
    if attenuation:
        amp = amp * np.exp(-(lengths * alpha[:k]).sum(axis=-1))
    return t, amp, lengths


def _head_wave(model, offsets, k, alpha, *, spreading, attenuation):
    """Times and amplitudes of the head wave along interface k (NaN where absent)."""
    v = model.velocity
    eps = model.permittivity
    h = model.thickness
    t = head_wave_time(offsets, h, v, interface=k)
    amp = np.zeros(offsets.size, dtype=complex)
    if not np.any(np.isfinite(t)):
        return t, amp
    sin_t = v[: k + 1] / v[k]
    cos_t = np.sqrt(np.clip(1.0 - sin_t[:k] ** 2, 0.0, None))
    lengths = 2.0 * h[:k] / cos_t
    x_c = float(np.sum(2.0 * h[:k] * sin_t[:k] / cos_t))
    base = _transmission_down_up(eps, sin_t[None, :], k)[0]  # critical reflection R = 1
    x = np.maximum(offsets, x_c)
    a = np.full(offsets.size, base)
    if spreading:
        a = a / lengths.sum() * (x_c / x) ** 2 if x_c > 0 else a / lengths.sum()
    if attenuation:
        a = a * np.exp(-(lengths * alpha[:k]).sum() - alpha[k] * (x - x_c))
    amp = np.where(np.isfinite(t), a, 0.0)
    return t, amp


# --- rendering and bookkeeping -----------------------------------------------------------


def _render(time, arrivals, wavelet, frequency_mhz, n_traces):
    if not arrivals:
        return np.zeros((n_traces, time.size))
    tau = np.column_stack([a["time"] for a in arrivals])
    # physics convention exp(-i omega t) -> positive-frequency coefficient conj(A)
    amp = np.column_stack([np.conj(a["amplitude"]) for a in arrivals])
    return shifted_wavelet_sum(time, tau, amp, frequency_mhz=frequency_mhz, wavelet=wavelet)


def _arrivals_dataset(arrivals, trace_dim, trace_coord, time, extra_offset=None):
    rows = {k: [] for k in ("trace", "time", "phase", "interface", "diffractor", "amp")}
    t_lo, t_hi = time[0], time[-1]
    for a in arrivals:
        ok = np.isfinite(a["time"]) & (a["time"] >= t_lo) & (a["time"] <= t_hi)
        ok &= np.abs(a["amplitude"]) > 0
        idx = np.flatnonzero(ok)
        rows["trace"].append(idx)
        rows["time"].append(a["time"][idx])
        rows["phase"].append(np.full(idx.size, a["phase"], dtype=object))
        rows["interface"].append(np.full(idx.size, a.get("interface", 0)))
        rows["diffractor"].append(np.full(idx.size, a.get("diffractor", -1)))
        rows["amp"].append(np.conj(a["amplitude"][idx]))
    cat = {k: (np.concatenate(v) if v else np.zeros(0)) for k, v in rows.items()}
    trace = cat["trace"].astype(int)
    amp = cat["amp"].astype(complex)
    coord = np.asarray(trace_coord, dtype=float)[trace]
    data = {
        "time": ("pick", cat["time"].astype(float), {"units": "ns", "long_name": "arrival time"}),
        "phase": ("pick", cat["phase"].astype(str), {"long_name": "arrival phase"}),
        "interface": (
            "pick",
            cat["interface"].astype(int),
            {"long_name": "interface (1 = bottom of layer 1; 0 if none)"},
        ),
        "amplitude": (
            "pick",
            amp.real,
            {"units": "1", "long_name": "in-phase amplitude of the wavelet"},
        ),
        "amplitude_quadrature": (
            "pick",
            amp.imag,
            {
                "units": "1",
                "long_name": "amplitude of the Hilbert-transformed wavelet (subtracted)",
            },
        ),
    }
    if trace_dim == "offset":
        data["offset"] = ("pick", coord, {"units": "m", "long_name": "antenna separation"})
    else:
        data["position"] = ("pick", coord, {"units": "m", "long_name": "profile position"})
        data["offset"] = (
            "pick",
            np.full(coord.size, float(extra_offset)),
            {"units": "m", "long_name": "antenna separation"},
        )
        data["diffractor"] = (
            "pick",
            cat["diffractor"].astype(int),
            {"long_name": "diffractor index (-1 if none)"},
        )
    order = np.lexsort((cat["time"], coord)) if coord.size else np.zeros(0, dtype=int)
    ds = xr.Dataset(data).isel(pick=order)
    ds.attrs["description"] = "true arrivals of a soilwave synthetic record"
    return ds


def _finish(data, time, noise, rng, **gather_kwargs):
    level = _noise_level(noise)
    if level > 0:
        peak = float(np.max(np.abs(data))) if data.size else 0.0
        data = data + rng.normal(0.0, level * peak, size=data.shape)
    dt = (time[-1] - time[0]) / (time.size - 1)
    return gather_from_array(data, dt_ns=dt, t0_ns=time[0], **gather_kwargs)


# --- multi-offset gathers -------------------------------------------------------------------


def synthetic_gather(
    model,
    *,
    offsets,
    dt_ns,
    n_samples,
    frequency_mhz,
    t0_ns=0.0,
    wavelet="ricker",
    noise=0.0,
    rng=None,
    include=GATHER_PHASES,
    spreading=True,
    attenuation=True,
    phase_scale=None,
    geometry="CMP",
    return_arrivals=False,
):
    """Synthetic multi-offset (CMP or WARR) gather over a layered earth.

    Parameters
    ----------
    model : LayeredEarth or dict
        Permittivity per layer, thickness per interface (m), optional
        conductivity per layer (mS/m).
    offsets : array_like
        Antenna separations, m, strictly increasing, >= 0.
    dt_ns : float
        Sample interval, ns.
    n_samples : int
        Samples per trace.
    frequency_mhz : float
        Antenna centre (Ricker peak) frequency, MHz; also the frequency of
        the attenuation and of the near-field cap.
    t0_ns : float, optional
        Time of the first sample, ns.
    wavelet : "ricker" or array_like, optional
        Ricker wavelet, or a wavelet sampled at ``dt_ns`` with its time zero
        at index ``len(wavelet) // 2``.
    noise : float, optional
        Standard deviation of white Gaussian noise relative to the peak
        absolute amplitude of the noise-free gather.
    rng : None, int or numpy.random.Generator, optional
        Source of the noise (seed it for reproducible data).
    include : sequence of str, optional
        Phases to model: ``"air"``, ``"ground"``, ``"reflection"`` (every
        interface), ``"refraction"`` (head waves, where a layer is faster
        than all above it).
    spreading, attenuation : bool, optional
        Apply geometric spreading and conductivity losses (module docstring).
    phase_scale : mapping, optional
        Extra factor per phase, e.g. ``{"air": 0.5}``.
    geometry : {"CMP", "WARR"}, optional
        Geometry attr of the gather (the kinematics of a layered earth are the same).
    return_arrivals : bool, optional
        Also return the true arrivals.

    Returns
    -------
    gather : xarray.DataArray
        Dims (offset, time), ``units="1"``.
    arrivals : xarray.Dataset
        Only with ``return_arrivals=True``: along ``pick``, the arrivals whose
        time lies inside the record: ``offset`` (m), ``time`` (ns), ``phase``,
        ``interface``, ``amplitude`` and ``amplitude_quadrature`` (the trace
        holds ``amplitude * w(t - time) - amplitude_quadrature * H[w](t - time)``).

    Examples
    --------
    >>> m = LayeredEarth(permittivity=[9.0, 25.0], thickness=[1.0])
    >>> g, truth = synthetic_gather(m, offsets=[0.5, 1.0, 2.0], dt_ns=0.1, n_samples=600,
    ...                             frequency_mhz=250.0, return_arrivals=True)
    >>> g.shape, sorted(set(truth.phase.values.tolist()))
    ((3, 600), ['air', 'ground', 'reflection'])
    """
    model = LayeredEarth.coerce(model)
    inc = _phases(include, GATHER_PHASES)
    scales = _scales(phase_scale, GATHER_PHASES)
    time = _time_axis(dt_ns, n_samples, t0_ns)
    wav = _wavelet(wavelet, frequency_mhz)
    gen = _rng(rng)
    if geometry not in ("CMP", "WARR"):
        msg = f"geometry must be 'CMP' or 'WARR'; got {geometry!r}"
        raise InputError(msg)
    x = np.atleast_1d(np.asarray(offsets, dtype=float))
    if x.ndim != 1 or x.size == 0 or not np.all(np.isfinite(x)) or np.any(x < 0):
        msg = f"offsets must be a non-empty 1-D array of finite values >= 0 m; got {offsets!r}"
        raise InputError(msg)
    f = float(frequency_mhz)
    alpha = model.attenuation_np_per_m(f)
    v = model.velocity
    x_near = 0.5 * v[0] * 1e3 / f  # half a wavelength in layer 1, m
    arrivals = []
    ones = np.ones(x.size)
    surf = _surface_spreading(x, x_near) if spreading else ones
    if "air" in inc:
        amp = scales["air"] * surf * ones
        arrivals.append({"phase": "air", "time": x / SPEED_OF_LIGHT, "amplitude": amp + 0j})
    if "ground" in inc:
        amp = scales["ground"] * surf * (np.exp(-alpha[0] * x) if attenuation else ones)
        arrivals.append({"phase": "ground", "time": x / v[0], "amplitude": amp + 0j})
    for k in range(1, model.n_interfaces + 1):
        if "reflection" in inc:
            t, amp, _ = _layered_reflection(
                model, x, model.thickness, k, alpha, spreading=spreading, attenuation=attenuation
            )
            arrivals.append(
                {
                    "phase": "reflection",
                    "interface": k,
                    "time": t,
                    "amplitude": scales["reflection"] * amp,
                }
            )
        if "refraction" in inc:
            t, amp = _head_wave(model, x, k, alpha, spreading=spreading, attenuation=attenuation)
            if np.any(np.isfinite(t)):
                arrivals.append(
                    {
                        "phase": "refraction",
                        "interface": k,
                        "time": t,
                        "amplitude": scales["refraction"] * amp,
                    }
                )
    data = _render(time, arrivals, wav, f, x.size)
    gather = _finish(
        data,
        time,
        noise,
        gen,
        offsets=x,
        frequency_mhz=f,
        geometry=geometry,
        history=history_line(
            "synthetic_gather",
            permittivity=model.permittivity,
            thickness=model.thickness,
            conductivity=model.conductivity,
            include=list(inc),
            noise=noise,
        ),
    )
    if not return_arrivals:
        return gather
    return gather, _arrivals_dataset(arrivals, "offset", x, time)
