"""Topp, Davis & Annan (1980) empirical cubic relation for mineral soils.

Forward (their regression of water content on permittivity)::

    theta = a0 + a1 eps + a2 eps^2 + a3 eps^3
    a0 = -5.3e-2, a1 = 2.92e-2, a2 = -5.5e-4, a3 = 4.3e-6

Published inverse (a separate regression of permittivity on water content)::

    eps = 3.03 + 9.3 theta + 146.0 theta^2 - 76.7 theta^3

The two regressions are **not** exact inverses of each other: they differ by
about 0.01 m3/m3 for 5 <= eps <= 30 and about 0.04 at eps = 40.
:meth:`Topp.permittivity` uses the published inverse by default, so that
forward models built from water content reproduce the paper; pass
``inverse="numeric"`` to invert the forward cubic exactly instead (also used
automatically once the cubic coefficients differ from the published ones, e.g.
after a site calibration).

Reference: Topp, G.C., Davis, J.L. & Annan, A.P. (1980), Electromagnetic
determination of soil water content: measurements in coaxial transmission lines,
Water Resour. Res. 16(3):574-582.
"""

from __future__ import annotations

from typing import ClassVar

import numpy as np

from soilwave.errors import InputError
from soilwave.petro.base import PetroModel

__all__ = ["Topp"]

#: Forward cubic coefficients, Topp et al. (1980).
TOPP_FORWARD = {"a0": -5.3e-2, "a1": 2.92e-2, "a2": -5.5e-4, "a3": 4.3e-6}
#: Published inverse cubic coefficients eps(theta), Topp et al. (1980).
TOPP_INVERSE = (3.03, 9.3, 146.0, -76.7)


class Topp(PetroModel):
    """Topp et al. (1980) cubic relation theta(eps) with its published inverse.

    Parameters
    ----------
    model_error : float, optional
        Standard deviation (m3/m3) of the scatter about the relation, added in
        :meth:`water_content_draws`. Default 0. Topp et al. report a standard error
        of estimate of about 0.013 m3/m3 (value from memory).
    inverse : {"published", "numeric"}
        How :meth:`permittivity` inverts: the published inverse cubic (default,
        used only while the coefficients equal the published ones) or numeric root
        finding of the forward cubic.
    **coefficients : float or Uncertain, optional
        ``a0``..``a3`` to replace the published coefficients (e.g. a site fit).

    Notes
    -----
    Calibrated range about eps 3-40 (value from memory), mineral soils.

    Examples
    --------
    >>> m = Topp()
    >>> round(float(m.water_content(20.0)), 4)
    0.3454
    >>> round(float(m.permittivity(0.2)), 4)
    10.1164
    """

    name = "Topp"
    reference = (
        "Topp, G.C., Davis, J.L. & Annan, A.P. (1980) Electromagnetic determination of "
        "soil water content: measurements in coaxial transmission lines. "
        "Water Resour. Res. 16(3):574-582"
    )
    _bounds: ClassVar[dict] = {k: (-np.inf, np.inf) for k in TOPP_FORWARD}
    _default_free = ("a0", "a1")
    _valid_eps_decl = (3.0, 40.0)  # value from memory

    def __init__(self, *, model_error=0.0, inverse="published", **coefficients):
        if inverse not in ("published", "numeric"):
            msg = f"inverse must be 'published' or 'numeric', got {inverse!r}"
            raise InputError(msg)
        super().__init__({**TOPP_FORWARD, **coefficients}, model_error=model_error)
        self._inverse_kind = inverse

    def _extra_repr(self):
        return {"inverse": self._inverse_kind}

    def _uses_published_inverse(self):
        return self._inverse_kind == "published" and self.means == TOPP_FORWARD

    def _has_closed_inverse(self):
        return self._uses_published_inverse()

    def _theta(self, eps, *, a0, a1, a2, a3):
        return a0 + eps * (a1 + eps * (a2 + eps * a3))

    def _eps(self, theta, **params):
        b0, b1, b2, b3 = TOPP_INVERSE
        return b0 + theta * (b1 + theta * (b2 + theta * b3))
