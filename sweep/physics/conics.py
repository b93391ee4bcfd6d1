r"""Two-body conic relations: vis-viva speeds, periods and regions of dominance.

Every function is a pure numpy kernel: inputs broadcast against each other, SI units
(m, s, m^3 s^-2) throughout, no I/O. Values outside a function's domain come back as NaN
and the Returns section says where.

References
----------
.. [1] H. D. Curtis, *Orbital Mechanics for Engineering Students*, 3rd ed.
   Oxford, UK: Butterworth-Heinemann, 2014. Ch. 2 (energy, vis-viva), Ch. 8 (hyperbolic
   excess speed, sphere of influence).
.. [2] R. R. Bate, D. D. Mueller and J. E. White, *Fundamentals of Astrodynamics*.
   New York: Dover, 1971. Ch. 1 (energy), Ch. 7 (sphere of influence).
.. [3] D. P. Hamilton and J. A. Burns, "Orbital stability zones about asteroids",
   Icarus 92(1):118-131, 1991, doi:10.1016/0019-1035(91)90039-V (Hill radius).
"""

from __future__ import annotations

import numpy as np
from numpy.typing import ArrayLike

__all__ = [
    "apsis_speed",
    "circular_speed",
    "half_period",
    "hill_radius",
    "hohmann_excess_speeds",
    "semi_major_axis_from_period",
    "hyperbolic_periapsis_speed",
    "sphere_of_influence_radius",
]


def _positive(value: ArrayLike) -> np.ndarray:
    """Return ``value`` as float array with non-positive entries replaced by NaN."""
    value = np.asarray(value, dtype=float)
    return np.where(value > 0, value, np.nan)


def circular_speed(gm: ArrayLike, radius: ArrayLike) -> np.ndarray:
    r"""
    Speed on a circular orbit.

    Parameters
    ----------
    gm : numeric
        Gravitational parameter of the central body. [m^3/s^2]
    radius : numeric
        Orbit radius from the body's centre. [m]

    Returns
    -------
    speed : numeric
        Circular orbital speed; NaN where radius <= 0. [m/s]

    Notes
    -----
    :math:`v_c = \sqrt{\mu / r}`, vis-viva with :math:`a = r` ([1]_ Ch. 2).

    Examples
    --------
    >>> round(float(circular_speed(3.986004418e14, 6678.0e3)), 1)
    7725.8
    """
    return np.sqrt(gm / _positive(radius))


def hyperbolic_periapsis_speed(v_inf: ArrayLike, gm: ArrayLike, radius: ArrayLike) -> np.ndarray:
    r"""
    Speed at periapsis of a hyperbolic (or, for zero excess speed, parabolic) approach.

    Parameters
    ----------
    v_inf : numeric
        Hyperbolic excess speed, the speed far from the body. [m/s]
    gm : numeric
        Gravitational parameter of the body. [m^3/s^2]
    radius : numeric
        Periapsis radius from the body's centre. [m]

    Returns
    -------
    speed : numeric
        Speed at periapsis; NaN where radius <= 0. [m/s]

    Notes
    -----
    :math:`v_p = \sqrt{v_\infty^2 + 2\mu/r_p}`: specific energy
    :math:`v^2/2 - \mu/r = v_\infty^2/2` is conserved on the conic ([1]_ Ch. 2 and Ch. 8).

    Examples
    --------
    >>> round(float(hyperbolic_periapsis_speed(2943.0, 3.986e14, 6678.0e3)), 0)
    11315.0
    """
    return np.sqrt(np.square(v_inf) + 2.0 * gm / _positive(radius))


def apsis_speed(gm: ArrayLike, radius: ArrayLike, other_apsis: ArrayLike) -> np.ndarray:
    r"""
    Speed at one apsis of the ellipse whose apsides are ``radius`` and ``other_apsis``.

    Parameters
    ----------
    gm : numeric
        Gravitational parameter of the body. [m^3/s^2]
    radius : numeric
        Radius of the apsis where the speed is wanted. [m]
    other_apsis : numeric
        Radius of the opposite apsis; may be smaller or larger than ``radius``. [m]

    Returns
    -------
    speed : numeric
        Orbital speed at ``radius``; NaN where either radius <= 0. Equal radii give the
        circular speed. [m/s]

    Notes
    -----
    Vis-viva :math:`v^2 = \mu (2/r - 1/a)` with :math:`a = (r + r_o)/2` gives
    :math:`v = \sqrt{2 \mu r_o / (r (r + r_o))}` ([1]_ Ch. 2 and Ch. 6, Hohmann transfer).

    Examples
    --------
    >>> mu, r1, r2 = 3.986004418e14, 6569.48111e3, 42159.48557e3
    >>> round(float(apsis_speed(mu, r1, r2) - circular_speed(mu, r1)), 1)
    2457.0
    """
    radius = _positive(radius)
    other_apsis = _positive(other_apsis)
    return np.sqrt(2.0 * gm * other_apsis / (radius * (radius + other_apsis)))


def half_period(gm: ArrayLike, radius: ArrayLike, other_apsis: ArrayLike) -> np.ndarray:
    r"""
    Time to coast from one apsis of an ellipse to the other.

    Parameters
    ----------
    gm : numeric
        Gravitational parameter of the body. [m^3/s^2]
    radius, other_apsis : numeric
        The two apsis radii. [m]

    Returns
    -------
    time : numeric
        Half the orbital period; NaN where either radius <= 0. [s]

    Notes
    -----
    :math:`T/2 = \pi \sqrt{a^3/\mu}` with :math:`a = (r_1 + r_2)/2` (Kepler's third law,
    [1]_ Ch. 2).
    """
    semi_major_axis = 0.5 * (_positive(radius) + _positive(other_apsis))
    return np.pi * np.sqrt(semi_major_axis**3 / gm)


def semi_major_axis_from_period(gm: ArrayLike, period: ArrayLike) -> np.ndarray:
    r"""
    Semi-major axis of the orbit with a given period.

    Parameters
    ----------
    gm : numeric
        Gravitational parameter of the body. [m^3/s^2]
    period : numeric
        Orbital period. [s]

    Returns
    -------
    semi_major_axis : numeric
        :math:`a = (\mu (T / 2\pi)^2)^{1/3}`, Kepler's third law ([1]_ Ch. 2). [m]

    Examples
    --------
    >>> round(float(semi_major_axis_from_period(42830e9, 7 * 3600.0)) / 1e3)
    8832
    """
    return np.cbrt(np.asarray(gm) * (np.asarray(period) / (2.0 * np.pi)) ** 2)


def sphere_of_influence_radius(
    semi_major_axis: ArrayLike, gm: ArrayLike, gm_parent: ArrayLike
) -> np.ndarray:
    r"""
    Laplace sphere-of-influence radius of a body orbiting a much heavier parent.

    Parameters
    ----------
    semi_major_axis : numeric
        Semi-major axis of the body's orbit about its parent. [m]
    gm, gm_parent : numeric
        Gravitational parameters of the body and of its parent. [m^3/s^2]

    Returns
    -------
    radius : numeric
        :math:`r_{SOI} = a (m/M)^{2/5}`; NaN where the semi-major axis <= 0. [m]

    Notes
    -----
    Laplace's criterion ([1]_ Ch. 8; [2]_ Ch. 7).
    """
    return _positive(semi_major_axis) * (np.asarray(gm) / gm_parent) ** 0.4


def hill_radius(semi_major_axis: ArrayLike, gm: ArrayLike, gm_parent: ArrayLike) -> np.ndarray:
    r"""
    Hill radius of a body on a circular orbit about a much heavier parent.

    Parameters
    ----------
    semi_major_axis : numeric
        Semi-major axis of the body's orbit about its parent. [m]
    gm, gm_parent : numeric
        Gravitational parameters of the body and of its parent. [m^3/s^2]

    Returns
    -------
    radius : numeric
        :math:`r_H = a \, (m / 3M)^{1/3}`; NaN where the semi-major axis <= 0. [m]

    Notes
    -----
    Distance to the L1/L2 points in the restricted three-body problem ([3]_).
    """
    return _positive(semi_major_axis) * (np.asarray(gm) / (3.0 * gm_parent)) ** (1.0 / 3.0)


def hohmann_excess_speeds(gm_parent: ArrayLike, departure_radius: ArrayLike, arrival_radius: ArrayLike):
    r"""
    Hyperbolic excess speeds at both ends of a Hohmann transfer between two circular,
    coplanar orbits about a common parent (patched conics).

    Parameters
    ----------
    gm_parent : numeric
        Gravitational parameter of the common parent. [m^3/s^2]
    departure_radius, arrival_radius : numeric
        Orbit radii of the departure and arrival bodies about the parent. [m]

    Returns
    -------
    departure, arrival : numeric
        :math:`|v_{transfer} - v_{body}|` at each end: the excess speed leaving the departure
        body and arriving at the arrival body; NaN where a radius <= 0. [m/s]

    Notes
    -----
    Each body moves on its circle at :math:`\sqrt{\mu/r}`; the transfer ellipse has its apsides
    at the two radii, so its speed at each end is :func:`apsis_speed` ([1]_ Ch. 8).

    Examples
    --------
    >>> mu, earth, mars = 1.327e20, 149.6e9, 227.9e9
    >>> [round(float(v)) for v in hohmann_excess_speeds(mu, earth, mars)]
    [2943, 2648]
    """
    departure = np.abs(
        apsis_speed(gm_parent, departure_radius, arrival_radius) - circular_speed(gm_parent, departure_radius)
    )
    arrival = np.abs(
        apsis_speed(gm_parent, arrival_radius, departure_radius) - circular_speed(gm_parent, arrival_radius)
    )
    return departure, arrival
