r"""Impulsive capture sequences from a hyperbolic approach into a circular orbit.

Each strategy kernel returns a :class:`Maneuver`: the magnitude of every burn and the time
from periapsis arrival until the last burn puts the spacecraft on the target circle. All
kernels are pure numpy, broadcast their inputs and work in SI units.

A property used throughout: in every sequence here only the first burn depends on the
arrival speed, and it does so through the hyperbolic periapsis speed alone
(:math:`\Delta v_1 = \sqrt{v_\infty^2 + 2\mu/r_p} - v_{ellipse}(r_p)`). So the cost of a
strategy is :math:`\sqrt{v_\infty^2 + 2\mu/r_p} + G`, where :math:`G` does not depend on
:math:`v_\infty`. Sub-expressions that do not involve :math:`v_\infty` therefore broadcast
over the other axes only, the intermediate apoapsis can be chosen once for all arrival
speeds, and the arrival speed at which two strategies cost the same has a closed form
(:func:`equal_cost_v_inf`).

References
----------
.. [1] H. D. Curtis, *Orbital Mechanics for Engineering Students*, 3rd ed.
   Oxford, UK: Butterworth-Heinemann, 2014. Ch. 6 (Hohmann and bi-elliptic transfers),
   Ch. 8 (planetary arrival and capture).
.. [2] D. A. Vallado, *Fundamentals of Astrodynamics and Applications*, 4th ed.
   Hawthorne, CA: Microcosm Press, 2013. Sec. 6.3 (coplanar transfers).
.. [3] J. Kiefer, "Sequential minimax search for a maximum", Proc. Amer. Math. Soc.
   4(3):502-506, 1953, doi:10.1090/S0002-9939-1953-0055639-3 (golden-section search).
"""

from __future__ import annotations

from typing import NamedTuple

import numpy as np
from numpy.typing import ArrayLike

from sweep.physics.conics import (
    apsis_speed,
    circular_speed,
    half_period,
    hyperbolic_periapsis_speed,
    semi_major_axis_from_period,
)

__all__ = [
    "Maneuver",
    "free_periapsis_capture",
    "free_periapsis_capture_at_period",
    "best_plane_change_split",
    "combined_burn",
    "best_intermediate_apoapsis",
    "direct_capture",
    "equal_cost_sensitivity",
    "equal_cost_v_inf",
    "three_burn_capture",
    "time_limited_apoapsis",
    "two_burn_capture",
]

_SCAN_POINTS = 33  # candidate apoapses on the first, coarse pass
_GOLDEN_STEPS = 48  # golden-section steps: the log-bracket shrinks by 0.618**48 ~ 1e-10
_BISECTION_STEPS = 64  # halvings of a log-bracket: far below float64 resolution of radius


class Maneuver(NamedTuple):
    """Burn magnitudes [m/s] in order of execution and the time to the last burn [s]."""

    burns: tuple[np.ndarray, ...]
    time: np.ndarray


def combined_burn(speed_before: ArrayLike, speed_after: ArrayLike, angle: ArrayLike) -> np.ndarray:
    r"""
    Delta-v of one burn that changes speed and turns the velocity by ``angle``.

    Parameters
    ----------
    speed_before, speed_after : numeric
        Speeds before and after the burn. [m/s]
    angle : numeric
        Angle between the two velocity vectors (here: the plane change made in this burn). [rad]

    Returns
    -------
    delta_v : numeric
        :math:`\sqrt{v_1^2 + v_2^2 - 2 v_1 v_2 \cos\theta}`, the law of cosines on the two
        velocity vectors ([1]_ Ch. 6, plane change maneuvers). [m/s]
    """
    before, after = np.asarray(speed_before), np.asarray(speed_after)
    # (v1 - v2)^2 + 4 v1 v2 sin^2(theta / 2): the same law, without cancellation at small angles;
    # exactly |v1 - v2| without a turn, so coplanar results do not move.
    turned = np.sqrt((after - before) ** 2 + 4.0 * before * after * np.sin(0.5 * np.asarray(angle)) ** 2)
    return np.where(np.equal(angle, 0.0), np.abs(after - before), turned)


def free_periapsis_capture(v_inf: ArrayLike, gm: ArrayLike, eccentricity: ArrayLike = 0.0):
    r"""
    The capture burn into an orbit of given eccentricity when the periapsis may be chosen.

    Parameters
    ----------
    v_inf : numeric
        Arrival speed. [m/s]
    gm : numeric
        Gravitational parameter of the body. [m^3/s^2]
    eccentricity : numeric
        Eccentricity of the orbit to capture into, 0 <= e < 1. [1]

    Returns
    -------
    periapsis_radius, delta_v : numeric
        The periapsis radius that minimises the single capture burn,
        :math:`r_p = 2\mu(1 - e) / (v_\infty^2 (1 + e))`, and that burn,
        :math:`\Delta v = v_\infty \sqrt{(1 - e)/2}` ([1]_ Ch. 8; Eqs. 8.67 and 8.70 in the 2nd
        edition). NaN radius where the arrival speed is 0. [m], [m/s]

    Examples
    --------
    >>> radius, burn = free_periapsis_capture(2648.0, 4.283e13, 0.0)
    >>> round(float(burn), 1)
    1872.4
    """
    v_inf = np.asarray(v_inf, dtype=float)
    eccentricity = np.asarray(eccentricity, dtype=float)
    with np.errstate(divide="ignore"):
        radius = np.where(v_inf > 0, 2.0 * np.asarray(gm) * (1.0 - eccentricity)
                          / (np.where(v_inf > 0, v_inf, 1.0) ** 2 * (1.0 + eccentricity)), np.nan)
    return radius, v_inf * np.sqrt(0.5 * (1.0 - eccentricity))


def free_periapsis_capture_at_period(
    v_inf: ArrayLike, gm: ArrayLike, semi_major_axis: ArrayLike, lowest_periapsis: ArrayLike
) -> np.ndarray:
    r"""
    The capture burn into an orbit of given period (semi-major axis) when the periapsis may be chosen.

    Parameters
    ----------
    v_inf, gm : numeric
        Arrival speed [m/s] and the body's gravitational parameter [m^3/s^2].
    semi_major_axis : numeric
        Semi-major axis of the orbit to capture into (Kepler's third law gives it from the period). [m]
    lowest_periapsis : numeric
        Lowest admissible periapsis radius. [m]

    Returns
    -------
    delta_v : numeric
        The least single capture burn, made at periapsis :math:`r = ` ``lowest_periapsis``:
        :math:`\sqrt{v_\infty^2 + 2\mu/r} - \sqrt{2\mu/r - \mu/a}`; NaN where
        :math:`r > a` (no orbit of that period has its periapsis so high). [m/s]

    Notes
    -----
    With :math:`x = 1/r` the burn at periapsis is
    :math:`f(x) = \sqrt{v_\infty^2 + 2\mu x} - \sqrt{2\mu x - \mu/a}` (vis-viva, [1]_ Ch. 2, 8), and
    :math:`f'(x) = \mu / \sqrt{v_\infty^2 + 2\mu x} - \mu / \sqrt{2\mu x - \mu/a} < 0`, since
    :math:`v_\infty^2 + 2\mu x > 2\mu x - \mu/a` for every bound orbit. So at fixed period the burn
    falls steadily as the periapsis falls and the optimum is the lowest admissible periapsis, unlike
    the optimum at fixed eccentricity (:func:`free_periapsis_capture`), which lies inside the range
    and keeps the eccentricity, not the period, of the target (our derivation).
    """
    radius = np.asarray(lowest_periapsis, dtype=float)
    semi_major_axis = np.asarray(semi_major_axis, dtype=float)
    gm = np.asarray(gm, dtype=float)
    on_orbit = np.sqrt(np.where(radius <= semi_major_axis, 2.0 * gm / radius - gm / semi_major_axis, np.nan))
    return hyperbolic_periapsis_speed(v_inf, gm, radius) - on_orbit


def _target_speed(gm, radius, target_radius, target_apoapsis):
    """Speed on the target orbit at ``radius`` (one of its apsides): circular without an apoapsis."""
    if target_apoapsis is None:
        return circular_speed(gm, target_radius)
    other = np.where(np.equal(radius, target_radius), target_apoapsis, target_radius)
    return apsis_speed(gm, radius, other)


def _coast(gm, radius, other_apsis):
    """Coast from one apsis to the other; none where the ellipse is a circle (next burn at once)."""
    return np.where(np.equal(radius, other_apsis), 0.0, half_period(gm, radius, other_apsis))


def direct_capture(
    v_inf: ArrayLike, gm: ArrayLike, target_radius: ArrayLike, plane_change: ArrayLike = 0.0,
    target_apoapsis: ArrayLike | None = None,
) -> Maneuver:
    r"""
    One burn at periapsis, placed at the target radius, from the hyperbola to the circle.

    Parameters
    ----------
    v_inf : numeric
        Arrival (hyperbolic excess) speed. [m/s]
    gm : numeric
        Gravitational parameter of the body. [m^3/s^2]
    target_radius : numeric
        Radius of the circular target orbit. [m]
    plane_change : numeric
        Plane change made with the capture burn (law of cosines, :func:`combined_burn`). [rad]
    target_apoapsis : numeric, optional
        Apoapsis radius of an elliptical target whose periapsis is ``target_radius``; the
        capture burn is then made at that periapsis. ``None``: a circle. [m]

    Returns
    -------
    Maneuver
        ``burns = (dv,)`` [m/s]; ``time`` is zero: the spacecraft is on the target circle
        as the burn ends at periapsis arrival [s]. NaN where the radius <= 0.

    Notes
    -----
    :math:`\Delta v = \sqrt{v_\infty^2 + 2\mu/r} - \sqrt{\mu/r}` ([1]_ Ch. 8, capture into a
    circular orbit; the departure burn of the same geometry has the same magnitude).

    Examples
    --------
    >>> m = direct_capture(2943.0, 3.986e14, 6678.0e3)
    >>> round(float(m.burns[0]), 0)
    3590.0
    """
    burn = combined_burn(hyperbolic_periapsis_speed(v_inf, gm, target_radius),
                         _target_speed(gm, target_radius, target_radius, target_apoapsis), plane_change)
    return Maneuver((burn,), np.where(np.isnan(burn), np.nan, 0.0))


def two_burn_capture(
    v_inf: ArrayLike, gm: ArrayLike, periapsis_radius: ArrayLike, target_radius: ArrayLike,
    plane_change: ArrayLike = 0.0, first_share: ArrayLike = 0.0, target_apoapsis: ArrayLike | None = None,
) -> Maneuver:
    r"""
    Capture at the approach periapsis into the ellipse that touches the target radius,
    then circularize there half an orbit later.

    Parameters
    ----------
    v_inf : numeric
        Arrival (hyperbolic excess) speed. [m/s]
    gm : numeric
        Gravitational parameter of the body. [m^3/s^2]
    periapsis_radius : numeric
        Periapsis radius of the approach hyperbola, where the first burn is made. It may lie
        below the target (a low dive) or above it (capture high, then lower). [m]
    target_radius : numeric
        Radius of the circular target orbit. [m]
    plane_change : numeric
        Total plane change. [rad]
    first_share : numeric
        Part of it made with the first burn; the rest with the second. [rad]
    target_apoapsis : numeric, optional
        Apoapsis radius of an elliptical target with periapsis ``target_radius``: the capture
        ellipse then reaches the target's apoapsis, where the second burn moves the other apsis
        to the target's periapsis. ``None``: a circle. [m]

    Returns
    -------
    Maneuver
        ``burns = (dv1, dv2)`` [m/s]; ``time``: half the period of the intermediate ellipse,
        or zero where the two radii are equal and the second burn vanishes [s].

    Notes
    -----
    The intermediate ellipse has apsides :math:`r_p` and :math:`r_t`, so the second burn is
    the second burn of a Hohmann transfer between the two radii ([1]_ Ch. 6; [2]_ Sec. 6.3):
    :math:`\Delta v_1 = v_{hyp}(r_p) - v_{ell}(r_p)`,
    :math:`\Delta v_2 = |v_c(r_t) - v_{ell}(r_t)|`.
    """
    far = target_radius if target_apoapsis is None else target_apoapsis
    first = combined_burn(hyperbolic_periapsis_speed(v_inf, gm, periapsis_radius),
                          apsis_speed(gm, periapsis_radius, far), first_share)
    second = combined_burn(apsis_speed(gm, far, periapsis_radius),
                           _target_speed(gm, far, target_radius, target_apoapsis),
                           np.asarray(plane_change) - first_share)
    return Maneuver((first, second), _coast(gm, periapsis_radius, far))


def three_burn_capture(
    v_inf: ArrayLike,
    gm: ArrayLike,
    periapsis_radius: ArrayLike,
    target_radius: ArrayLike,
    apoapsis_radius: ArrayLike,
    plane_change: ArrayLike = 0.0,
    target_apoapsis: ArrayLike | None = None,
) -> Maneuver:
    r"""
    Capture into a high ellipse, move periapsis to the target radius at its apoapsis, then
    lower the apoapsis to the target radius.

    Parameters
    ----------
    v_inf : numeric
        Arrival (hyperbolic excess) speed. [m/s]
    gm : numeric
        Gravitational parameter of the body. [m^3/s^2]
    periapsis_radius : numeric
        Periapsis radius of the approach hyperbola. [m]
    target_radius : numeric
        Radius of the circular target orbit. [m]
    apoapsis_radius : numeric
        Apoapsis radius of the intermediate ellipse, no smaller than either other radius. [m]
    plane_change : numeric
        Plane change, made with the apoapsis burn where the speed is lowest. [rad]
    target_apoapsis : numeric, optional
        Apoapsis radius of an elliptical target with periapsis ``target_radius``: the third burn
        lowers the apoapsis to it. ``None``: a circle. [m]

    Returns
    -------
    Maneuver
        ``burns = (dv1, dv2, dv3)`` [m/s]; ``time``: half a period of the capture ellipse
        plus half a period of the ellipse from the apoapsis down to the target, each zero
        where that ellipse is a circle (the next burn follows at once) [s].

    Notes
    -----
    Burn 1 at :math:`r_p`: hyperbola to the ellipse :math:`(r_p, r_a)`. Burn 2 at
    :math:`r_a`: to the ellipse :math:`(r_t, r_a)`. Burn 3 at :math:`r_t`: to the circle.
    Each is a difference of vis-viva apsis speeds, as in the bi-elliptic transfer
    ([1]_ Ch. 6; [2]_ Sec. 6.3). With :math:`r_a = r_t \ge r_p` it reduces to
    :func:`two_burn_capture`.
    """
    burns = _three_burn_burns(v_inf, gm, periapsis_radius, target_radius, apoapsis_radius, plane_change,
                              target_apoapsis)
    time = _coast(gm, periapsis_radius, apoapsis_radius) + _coast(gm, target_radius, apoapsis_radius)
    return Maneuver(burns, time)


def _three_burn_burns(v_inf, gm, periapsis_radius, target_radius, apoapsis_radius, plane_change=0.0,
                      target_apoapsis=None):
    """The three burn magnitudes of :func:`three_burn_capture`, without the times."""
    first = hyperbolic_periapsis_speed(v_inf, gm, periapsis_radius) - apsis_speed(
        gm, periapsis_radius, apoapsis_radius
    )
    second = combined_burn(apsis_speed(gm, apoapsis_radius, periapsis_radius),
                           apsis_speed(gm, apoapsis_radius, target_radius), plane_change)
    third = np.abs(apsis_speed(gm, target_radius, apoapsis_radius)
                   - _target_speed(gm, target_radius, target_radius, target_apoapsis))
    return first, second, third


def _three_burn_total(gm, periapsis_radius, target_radius, apoapsis_radius, plane_change=0.0, target_apoapsis=None):
    """Total three-burn delta-v at zero arrival speed (the v_inf-free part plus a constant)."""
    return sum(_three_burn_burns(0.0, gm, periapsis_radius, target_radius, apoapsis_radius, plane_change,
                                 target_apoapsis))


def best_intermediate_apoapsis(
    gm: ArrayLike,
    periapsis_radius: ArrayLike,
    target_radius: ArrayLike,
    upper_radius: ArrayLike,
    target_apoapsis: ArrayLike | None = None,
) -> np.ndarray:
    r"""
    Intermediate apoapsis that minimises the total three-burn delta-v within a bound.

    Parameters
    ----------
    gm : numeric
        Gravitational parameter of the body. [m^3/s^2]
    periapsis_radius, target_radius : numeric
        Approach periapsis and target radii. [m]
    upper_radius : numeric
        Largest admissible apoapsis radius. [m]
    target_apoapsis : numeric, optional
        Apoapsis of an elliptical target (periapsis ``target_radius``); ``None``: a circle. [m]

    Returns
    -------
    apoapsis_radius : numeric
        The minimising radius in :math:`[\max(r_p, r_t), r_{upper}]` (the target's apoapsis in
        place of :math:`r_t` for an elliptical target); the lower end where
        the bound lies below it; NaN where any input is NaN. The answer holds for every
        arrival speed (see the module notes). [m]

    Notes
    -----
    A scan of 33 log-spaced candidates between the ends, then golden-section search
    ([3]_) on log radius around the best candidate; the better of the scan's best and the
    refined point is returned, so an optimum at an end of the interval is returned exactly.
    In the coplanar impulsive model the total has been seen to fall monotonically with the
    apoapsis (so the bound decides), but nothing here relies on that.
    """
    far = target_radius if target_apoapsis is None else target_apoapsis
    gm, periapsis_radius, target_radius, upper_radius, far = np.broadcast_arrays(
        *(np.asarray(x, dtype=float) for x in (gm, periapsis_radius, target_radius, upper_radius, far))
    )
    lower = np.maximum(periapsis_radius, far)
    upper = np.maximum(upper_radius, lower)

    def cost(radius, index):
        return _three_burn_total(gm[index], periapsis_radius[index], target_radius[index], radius, 0.0,
                                 None if target_apoapsis is None else far[index])

    return _scan_and_refine(cost, lower, upper, np.log, np.exp)


def _scan_and_refine(cost, lower, upper, forward, inverse):
    """
    Minimise ``cost(x, index)`` over ``x`` in ``[lower, upper]`` (arrays of any shape).

    A scan of ``_SCAN_POINTS`` candidates evenly spaced in ``u = forward(x)``, then golden-section
    search ([3]_) in ``u`` between the best candidate's neighbours; the better of the scan's
    best and the refined point wins, so an optimum at an end comes back exactly. ``index`` is a
    tuple of broadcastable index arrays selecting the points ``x`` belongs to (the cost's other
    inputs are indexed with it). NaN where the bound or every candidate's cost is NaN.
    """
    shape = lower.shape
    grid = np.indices(shape, sparse=True)
    low_u, high_u = forward(lower)[..., None], forward(upper)[..., None]
    u = low_u + (high_u - low_u) * np.linspace(0.0, 1.0, _SCAN_POINTS)
    # inside the ends, which come exactly, not via inverse(forward): that may round one ulp outside
    # them (all candidates of a zero-width interval, say)
    candidates = np.clip(inverse(u), lower[..., None], upper[..., None])
    candidates[..., 0], candidates[..., -1] = lower, upper
    cost_scan = cost(candidates, tuple(g[..., None] for g in grid))
    best = np.argmin(np.where(np.isnan(cost_scan), np.inf, cost_scan), axis=-1)[..., None]
    scan_best = np.take_along_axis(candidates, best, axis=-1)[..., 0]
    scan_cost = np.take_along_axis(cost_scan, best, axis=-1)[..., 0]
    left = np.take_along_axis(u, np.maximum(best - 1, 0), axis=-1)[..., 0]
    right = np.take_along_axis(u, np.minimum(best + 1, _SCAN_POINTS - 1), axis=-1)[..., 0]
    ratio = (np.sqrt(5.0) - 1.0) / 2.0
    inner_left = right - ratio * (right - left)
    inner_right = left + ratio * (right - left)
    cost_left = cost(inverse(inner_left), grid)
    cost_right = cost(inverse(inner_right), grid)
    for _ in range(_GOLDEN_STEPS):
        keep_left = cost_left <= cost_right
        old_inner_left, old_inner_right = inner_left, inner_right
        right = np.where(keep_left, old_inner_right, right)
        left = np.where(keep_left, left, old_inner_left)
        inner_left = np.where(keep_left, right - ratio * (right - left), old_inner_right)
        inner_right = np.where(keep_left, old_inner_left, left + ratio * (right - left))
        moved_cost = cost(inverse(np.where(keep_left, inner_left, inner_right)), grid)
        cost_left, cost_right = (
            np.where(keep_left, moved_cost, cost_right),
            np.where(keep_left, cost_left, moved_cost),
        )
    refined = np.clip(inverse(0.5 * (left + right)), lower, upper)
    refined_cost = cost(refined, grid)
    chosen = np.where(refined_cost < scan_cost, refined, scan_best)
    return np.where(np.isnan(upper) | np.isnan(scan_cost), np.nan, chosen)


def best_plane_change_split(
    v_inf: ArrayLike, gm: ArrayLike, periapsis_radius: ArrayLike, target_radius: ArrayLike,
    plane_change: ArrayLike, target_apoapsis: ArrayLike | None = None,
) -> np.ndarray:
    r"""
    Part of the plane change that ``two_burn`` should make with its first burn.

    Parameters
    ----------
    v_inf : numeric
        Arrival speed. [m/s]
    gm : numeric
        Gravitational parameter of the body. [m^3/s^2]
    periapsis_radius, target_radius : numeric
        Approach periapsis and target radii. [m]
    plane_change : numeric
        Total plane change. [rad]

    Returns
    -------
    first_share : numeric
        The share in :math:`[0, \Delta i]` minimising the total of :func:`two_burn_capture`
        (scan and golden-section search, as for the apoapsis); 0 without a plane change. [rad]
    """
    far = target_radius if target_apoapsis is None else target_apoapsis
    arrays = np.broadcast_arrays(*(np.asarray(x, dtype=float)
                                   for x in (v_inf, gm, periapsis_radius, target_radius, plane_change, far)))
    v_inf, gm, periapsis_radius, target_radius, plane_change, far = arrays

    def cost(share, index):
        return sum(two_burn_capture(v_inf[index], gm[index], periapsis_radius[index], target_radius[index],
                                    plane_change[index], share,
                                    None if target_apoapsis is None else far[index]).burns)

    return _scan_and_refine(cost, np.zeros_like(plane_change), plane_change, lambda x: x, lambda u: u)


def time_limited_apoapsis(
    gm: ArrayLike, periapsis_radius: ArrayLike, target_radius: ArrayLike, max_time: ArrayLike,
    target_apoapsis: ArrayLike | None = None,
) -> np.ndarray:
    r"""
    Largest intermediate apoapsis whose three-burn sequence reaches the target in time.

    Parameters
    ----------
    gm : numeric
        Gravitational parameter of the body. [m^3/s^2]
    periapsis_radius, target_radius : numeric
        Approach periapsis and target radii. [m]
    max_time : numeric
        Longest admissible time from periapsis arrival to the last burn. [s]

    Returns
    -------
    apoapsis_radius : numeric
        Radius where the time of :func:`three_burn_capture` equals ``max_time``; NaN where
        even the smallest apoapsis, :math:`\max(r_p, r_t)`, takes longer. [m]

    Notes
    -----
    The time is a sum of two half periods, each rising with the apoapsis (Kepler's third
    law, [1]_ Ch. 2), so bisection on log radius between the smallest apoapsis and
    :math:`2 (\mu (t_{max}/2\pi)^2)^{1/3}` (where each half period alone reaches
    :math:`t_{max}/2`) brackets the single root. Where only the smallest apoapsis fits, it is
    returned exactly (the degenerate three-burn sequence, identical to the two-burn one).
    """
    far = target_radius if target_apoapsis is None else target_apoapsis
    gm, periapsis_radius, target_radius, max_time, far = np.broadcast_arrays(
        *(np.asarray(x, dtype=float) for x in (gm, periapsis_radius, target_radius, max_time, far))
    )

    def time_of(apoapsis):
        return three_burn_capture(0.0, gm, periapsis_radius, target_radius, apoapsis).time

    lower = np.maximum(periapsis_radius, far)
    upper = np.maximum(2.0 * semi_major_axis_from_period(gm, max_time), lower)
    low, high = np.log(lower), np.log(upper)
    for _ in range(_BISECTION_STEPS):
        middle = 0.5 * (low + high)
        fits = time_of(np.exp(middle)) <= max_time
        low = np.where(fits, middle, low)
        high = np.where(fits, high, middle)
    # Where no larger apoapsis fits, the answer is the smallest one itself, returned exactly:
    # exp(log(r)) can come back one ulp above r, and an intermediate ellipse one ulp away from
    # the target circle costs a whole extra half period in the time model (a circle costs none).
    limit = np.where(low == np.log(lower), lower, np.exp(low))
    return np.where(time_of(lower) <= max_time, limit, np.nan)


def equal_cost_v_inf(
    gm: ArrayLike, first_radius: ArrayLike, second_radius: ArrayLike, cost_offset: ArrayLike
) -> np.ndarray:
    r"""
    Arrival speed at which two capture sequences with different first-burn radii cost the same.

    Parameters
    ----------
    gm : numeric
        Gravitational parameter of the body. [m^3/s^2]
    first_radius, second_radius : numeric
        Radii of the first burn of sequence 1 and of sequence 2. [m]
    cost_offset : numeric
        :math:`K = G_2 - G_1`, where each sequence costs
        :math:`\sqrt{v_\infty^2 + 2\mu/r_i} + G_i` (module notes). [m/s]

    Returns
    -------
    v_inf : numeric
        The non-negative root of
        :math:`\sqrt{v^2 + 2\mu/r_1} - \sqrt{v^2 + 2\mu/r_2} = K`; NaN where there is none
        (including equal radii). The root is unique where it exists, since the left side is
        monotonic in :math:`v`. [m/s]

    Notes
    -----
    With :math:`p = \sqrt{v^2 + A}`, :math:`q = \sqrt{v^2 + B}`, :math:`A = 2\mu/r_1`,
    :math:`B = 2\mu/r_2`: :math:`p - q = K` and :math:`p^2 - q^2 = A - B` give
    :math:`p + q = (A - B)/K`, hence :math:`p = ((A-B)/K + K)/2` and :math:`v^2 = p^2 - A`.
    Exact for the impulsive model; tested against a bracketing root finder.
    """
    escape_first = 2.0 * np.asarray(gm) / np.asarray(first_radius, dtype=float)
    escape_second = 2.0 * np.asarray(gm) / np.asarray(second_radius, dtype=float)
    offset = np.asarray(cost_offset, dtype=float)
    with np.errstate(divide="ignore", invalid="ignore"):
        total = (escape_first - escape_second) / offset
        first_speed = 0.5 * (total + offset)
        second_speed = first_speed - offset
        square = first_speed**2 - escape_first
    valid = (offset != 0) & (total > 0) & (first_speed >= 0) & (second_speed >= 0) & (square >= 0)
    return np.where(valid, np.sqrt(np.where(valid, square, 0.0)), np.nan)


def equal_cost_sensitivity(
    gm: ArrayLike, first_radius: ArrayLike, second_radius: ArrayLike, v_inf: ArrayLike
) -> np.ndarray:
    r"""
    How far the equal-cost speed moves per unit change of the cost offset: the root's condition.

    Parameters
    ----------
    gm : numeric
        Gravitational parameter of the body. [m^3/s^2]
    first_radius, second_radius : numeric
        Radii of the first burn of sequence 1 and of sequence 2, as in :func:`equal_cost_v_inf`. [m]
    v_inf : numeric
        The equal-cost speed (a root from :func:`equal_cost_v_inf`). [m/s]

    Returns
    -------
    sensitivity : numeric
        :math:`|dv/dK| = 1 / |dD/dv|` at the root, in m/s of arrival speed per m/s of cost
        offset; inf at :math:`v = 0` or equal radii, NaN where ``v_inf`` is NaN. [1]

    Notes
    -----
    The cost difference is :math:`D(v) = \sqrt{v^2 + A} - \sqrt{v^2 + B} - K` with
    :math:`A = 2\mu/r_1`, :math:`B = 2\mu/r_2` (:func:`equal_cost_v_inf`), so
    :math:`dD/dv = v (1/\sqrt{v^2 + A} - 1/\sqrt{v^2 + B})`, and by the implicit function
    theorem a change :math:`\delta K` moves the root by :math:`\delta K / (dD/dv)`. Both
    square roots are nearly equal where :math:`v^2` dwarfs :math:`A` and :math:`B`, so the
    derivative is small and the root ill-conditioned there.
    """
    v = np.asarray(v_inf, dtype=float)
    first = np.sqrt(v**2 + 2.0 * np.asarray(gm) / np.asarray(first_radius, dtype=float))
    second = np.sqrt(v**2 + 2.0 * np.asarray(gm) / np.asarray(second_radius, dtype=float))
    with np.errstate(divide="ignore"):
        return 1.0 / np.abs(v * (1.0 / first - 1.0 / second))
