"""A horizontally layered earth model: permittivity, thickness and conductivity per layer.

Layer-1 module (pure numpy). Layer 1 is at the surface; interface ``k`` is
the bottom of layer ``k``; the last layer is a half-space. Units: relative
permittivity dimensionless (>= 1), thickness m (> 0), conductivity mS/m (>= 0).
"""

from __future__ import annotations

import dataclasses

import numpy as np

from soilwave.errors import InputError, ValidRangeError
from soilwave.wave import attenuation, wave_velocity

__all__ = ["LayeredEarth"]


def _vector(value, name: str, unit: str) -> np.ndarray:
    try:
        a = np.array(value, dtype=float)
    except (TypeError, ValueError):
        msg = f"{name} must be numbers ({unit}); got {value!r}"
        raise InputError(msg) from None
    a = np.atleast_1d(a)
    if a.ndim != 1:
        msg = f"{name} must be 1-D (one value per layer or interface); got shape {a.shape}"
        raise InputError(msg)
    if not np.all(np.isfinite(a)):
        i = int(np.flatnonzero(~np.isfinite(a))[0])
        msg = f"{name}[{i}] is {float(a[i])!r}; expected finite values in {unit}"
        raise InputError(msg)
    a.setflags(write=False)
    return a


@dataclasses.dataclass(frozen=True)
class LayeredEarth:
    """Horizontally layered earth over a half-space.

    Parameters
    ----------
    permittivity : array_like, shape (n_layers,)
        Relative permittivity of each layer, >= 1 (layer 1 at the surface).
    thickness : array_like, shape (n_layers - 1,)
        Thickness of each layer above the half-space, m, > 0.
    conductivity : array_like, shape (n_layers,), optional
        Electrical conductivity of each layer, mS/m, >= 0 (default: lossless).

    Examples
    --------
    >>> m = LayeredEarth(permittivity=[9.0, 25.0], thickness=[1.0])
    >>> m.n_layers, m.velocity.round(4).tolist(), m.interface_depth.tolist()
    (2, [0.0999, 0.06], [1.0])
    """

    permittivity: np.ndarray
    thickness: np.ndarray
    conductivity: np.ndarray | None = None

    def __post_init__(self):
        eps = _vector(self.permittivity, "permittivity", "dimensionless")
        h = _vector(self.thickness, "thickness", "m") if np.size(self.thickness) else np.zeros(0)
        if np.any(eps < 1.0):
            i = int(np.flatnonzero(eps < 1.0)[0])
            msg = f"permittivity[{i}] = {float(eps[i])!r} is below 1 (relative permittivity)"
            raise ValidRangeError(msg)
        if h.size != eps.size - 1:
            msg = (
                f"thickness has {h.size} value(s) but permittivity has {eps.size} layer(s); "
                "expected one thickness per layer above the half-space (n_layers - 1)"
            )
            raise InputError(msg)
        if np.any(h <= 0):
            i = int(np.flatnonzero(h <= 0)[0])
            msg = f"thickness[{i}] = {float(h[i])!r} m; expected > 0"
            raise InputError(msg)
        sigma = None
        if self.conductivity is not None:
            sigma = _vector(self.conductivity, "conductivity", "mS/m")
            if sigma.size != eps.size:
                msg = (
                    f"conductivity has {sigma.size} value(s) but there are {eps.size} layers; "
                    "expected one per layer (mS/m)"
                )
                raise InputError(msg)
            if np.any(sigma < 0):
                i = int(np.flatnonzero(sigma < 0)[0])
                msg = f"conductivity[{i}] = {float(sigma[i])!r} mS/m; expected >= 0"
                raise InputError(msg)
        h.setflags(write=False)
        object.__setattr__(self, "permittivity", eps)
        object.__setattr__(self, "thickness", h)
        object.__setattr__(self, "conductivity", sigma)

    def __eq__(self, other):
        if not isinstance(other, LayeredEarth):
            return NotImplemented
        same_sigma = (self.conductivity is None and other.conductivity is None) or (
            self.conductivity is not None
            and other.conductivity is not None
            and np.array_equal(self.conductivity, other.conductivity)
        )
        return (
            np.array_equal(self.permittivity, other.permittivity)
            and np.array_equal(self.thickness, other.thickness)
            and same_sigma
        )

    __hash__ = None

    @property
    def n_layers(self) -> int:
        """Number of layers including the half-space."""
        return int(self.permittivity.size)

    @property
    def n_interfaces(self) -> int:
        """Number of interfaces (``n_layers - 1``)."""
        return int(self.thickness.size)

    @property
    def velocity(self) -> np.ndarray:
        """Low-loss wave velocity ``c / sqrt(eps)`` per layer, m/ns."""
        return np.atleast_1d(wave_velocity(self.permittivity))

    @property
    def interface_depth(self) -> np.ndarray:
        """Depth of each interface below the surface, m."""
        return np.cumsum(self.thickness)

    def attenuation_np_per_m(self, frequency_mhz) -> np.ndarray:
        """Plane-wave attenuation per layer at ``frequency_mhz``, Np/m (0 if lossless).

        Examples
        --------
        >>> m = LayeredEarth([25.0, 9.0], [1.0], conductivity=[10.0, 1.0])
        >>> m.attenuation_np_per_m(100.0).round(5).tolist()
        [0.37649, 0.06279]
        """
        if self.conductivity is None:
            return np.zeros(self.n_layers)
        return np.atleast_1d(attenuation(self.permittivity, self.conductivity, frequency_mhz))

    @classmethod
    def coerce(cls, model) -> LayeredEarth:
        """A LayeredEarth from itself or a mapping with the same keys.

        Examples
        --------
        >>> LayeredEarth.coerce({"permittivity": [4.0], "thickness": []}).n_layers
        1
        """
        if isinstance(model, cls):
            return model
        if isinstance(model, dict):
            unknown = set(model) - {"permittivity", "thickness", "conductivity"}
            if unknown or "permittivity" not in model or "thickness" not in model:
                msg = (
                    "a model mapping needs keys 'permittivity' and 'thickness' (and optionally "
                    f"'conductivity'); got {sorted(model)}"
                )
                raise InputError(msg)
            return cls(**model)
        msg = f"model must be a LayeredEarth or a mapping; got {type(model).__name__}"
        raise InputError(msg)
