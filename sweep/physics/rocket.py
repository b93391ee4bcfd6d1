r"""Propellant from delta-v: the ideal rocket equation.

References
----------
.. [1] H. D. Curtis, *Orbital Mechanics for Engineering Students*, 3rd ed.
   Oxford, UK: Butterworth-Heinemann, 2014. Ch. 6 (propellant for impulsive maneuvers)
   and Ch. 11 (rocket equation).
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike

__all__ = ["STANDARD_GRAVITY", "propellant_mass"]

STANDARD_GRAVITY = 9.80665  # m s-2, exact by definition (3rd CGPM, 1901)


def propellant_mass(delta_v: ArrayLike, specific_impulse: ArrayLike, initial_mass: ArrayLike) -> np.ndarray:
    r"""
    Propellant burned to deliver a delta-v, from the ideal rocket equation.

    Parameters
    ----------
    delta_v : numeric
        Total velocity change delivered. [m/s]
    specific_impulse : numeric
        Engine specific impulse referred to standard gravity. [s]
    initial_mass : numeric
        Spacecraft mass before the first burn. [kg]

    Returns
    -------
    mass : numeric
        :math:`m_0 (1 - e^{-\Delta v / (I_{sp} g_0)})`; NaN where the specific impulse <= 0. [kg]

    Notes
    -----
    Tsiolkovsky's equation ([1]_ Ch. 6 and Ch. 11). For a sequence of burns with one engine
    the total delta-v gives the total propellant.

    Examples
    --------
    >>> round(float(propellant_mass(3590.0, 300.0, 1.0)), 3)
    0.705
    """
    exhaust_speed = np.where(np.asarray(specific_impulse) > 0, specific_impulse, np.nan) * STANDARD_GRAVITY
    return initial_mass * -np.expm1(-np.asarray(delta_v) / exhaust_speed)
