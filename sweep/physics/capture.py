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
    "best_intermediate_apoapsis",
    "best_plane_change_split",
    "best_three_burn_turn",
    "combined_burn",
    "direct_capture",
    "equal_cost_sensitivity",
    "equal_cost_v_inf",
    "free_periapsis_capture",
    "free_periapsis_capture_at_period",
    "three_burn_capture",
    "time_limited_apoapsis",
    "two_burn_capture",
]

_SCAN_POINTS = 33  # candidate apoapses on the first, coarse pass
_GOLDEN_STEPS = 48  # golden-section steps: the log-bracket shrinks by 0.618**48 ~ 1e-10
_TURN_SCAN_APOAPSES = 5  # apoapses on the joint scan of a turning three-burn sequence (ends included)
_TURN_SCAN_SPLITS = 20  # the turn in 20ths on that scan: 231 splits over the three burns
_TURN_ROUNDS = 2  # rounds of golden-section search after it, brackets halved each round
_TURN_GOLDEN_STEPS = 12  # steps of each: the bracket shrinks by 0.618**12 ~ 3e-3
_TURN_BLOCK = 1 << 14  # points searched together: its ~70 temporaries fill ~9 MB
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
    first_share: ArrayLike = 0.0,
    third_share: ArrayLike = 0.0,
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
        Total plane change; what the first and third burns do not make, the apoapsis burn makes. [rad]
    target_apoapsis : numeric, optional
        Apoapsis radius of an elliptical target with periapsis ``target_radius``: the third burn
        lowers the apoapsis to it. ``None``: a circle. [m]
    first_share, third_share : numeric
        Parts of the plane change made with the first (periapsis) and the third (target) burn;
        ``plane_change - first_share - third_share`` is made at apoapsis. All three burns lie on
        the line of apsides, so turns about it add as angles. [rad]

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
                              target_apoapsis, first_share, third_share)
    time = _coast(gm, periapsis_radius, apoapsis_radius) + _coast(gm, target_radius, apoapsis_radius)
    return Maneuver(burns, time)


def _three_burn_speeds(v_inf, gm, periapsis_radius, target_radius, apoapsis_radius, target_apoapsis=None):
    """Speeds (before, after) of each burn of :func:`three_burn_capture`, in order."""
    return (
        (hyperbolic_periapsis_speed(v_inf, gm, periapsis_radius), apsis_speed(gm, periapsis_radius, apoapsis_radius)),
        (apsis_speed(gm, apoapsis_radius, periapsis_radius), apsis_speed(gm, apoapsis_radius, target_radius)),
        (apsis_speed(gm, target_radius, apoapsis_radius),
         _target_speed(gm, target_radius, target_radius, target_apoapsis)),
    )


def _three_burn_burns(v_inf, gm, periapsis_radius, target_radius, apoapsis_radius, plane_change=0.0,
                      target_apoapsis=None, first_share=0.0, third_share=0.0):
    """The three burn magnitudes of :func:`three_burn_capture`, without the times."""
    turns = (first_share, np.asarray(plane_change) - first_share - third_share, third_share)
    return tuple(combined_burn(before, after, turn) for (before, after), turn in
                 zip(_three_burn_speeds(v_inf, gm, periapsis_radius, target_radius, apoapsis_radius,
                                        target_apoapsis), turns, strict=True))


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
    refined = np.clip(inverse(_golden_section(lambda point: cost(inverse(point), grid), left, right)), lower, upper)
    refined_cost = cost(refined, grid)
    chosen = np.where(refined_cost < scan_cost, refined, scan_best)
    return np.where(np.isnan(upper) | np.isnan(scan_cost), np.nan, chosen)


def _golden_section(cost, left, right, steps=_GOLDEN_STEPS):
    """
    Golden-section search ([3]_) of ``cost(u)`` in ``[left, right]`` (arrays, elementwise), ``steps``
    steps; the middle of the last bracket. Finds the minimum of a unimodal cost, else a local one.
    """
    ratio = (np.sqrt(5.0) - 1.0) / 2.0
    inner_left = right - ratio * (right - left)
    inner_right = left + ratio * (right - left)
    cost_left = cost(inner_left)
    cost_right = cost(inner_right)
    for _ in range(steps):
        keep_left = cost_left <= cost_right
        old_inner_left, old_inner_right = inner_left, inner_right
        right = np.where(keep_left, old_inner_right, right)
        left = np.where(keep_left, left, old_inner_left)
        inner_left = np.where(keep_left, right - ratio * (right - left), old_inner_right)
        inner_right = np.where(keep_left, old_inner_left, left + ratio * (right - left))
        moved_cost = cost(np.where(keep_left, inner_left, inner_right))
        cost_left, cost_right = (
            np.where(keep_left, moved_cost, cost_right),
            np.where(keep_left, cost_left, moved_cost),
        )
    return 0.5 * (left + right)


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


def best_three_burn_turn(
    v_inf: ArrayLike, gm: ArrayLike, periapsis_radius: ArrayLike, target_radius: ArrayLike,
    upper_radius: ArrayLike, plane_change: ArrayLike, target_apoapsis: ArrayLike | None = None,
    apoapsis_radius: ArrayLike | None = None,
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    r"""
    Intermediate apoapsis and split of the plane change that minimise the turning three-burn total.

    Parameters
    ----------
    v_inf : numeric
        Arrival speed. [m/s]
    gm : numeric
        Gravitational parameter of the body. [m^3/s^2]
    periapsis_radius, target_radius : numeric
        Approach periapsis and target radii. [m]
    upper_radius : numeric
        Largest admissible apoapsis radius: the bound, and where there is a time cap the
        apoapsis whose sequence takes that long (:func:`time_limited_apoapsis`; the time rises
        with the apoapsis, so every apoapsis below it fits the cap). [m]
    plane_change : numeric
        Total plane change. [rad]
    target_apoapsis : numeric, optional
        Apoapsis of an elliptical target (periapsis ``target_radius``); ``None``: a circle. [m]
    apoapsis_radius : numeric, optional
        An apoapsis to try as well with the whole turn made there (the coplanar plan's), so
        that the answer never costs more than that sequence. [m]

    Returns
    -------
    apoapsis_radius, first_share, third_share : numeric
        The apoapsis in :math:`[\max(r_p, r_t), r_{upper}]` (as for :func:`best_intermediate_apoapsis`)
        and the parts of the plane change made with the first and the third burn of
        :func:`three_burn_capture` (the rest at apoapsis), each in :math:`[0, \Delta i]`, their
        sum at most :math:`\Delta i`. NaN where the bound or the cost is NaN. [m], [rad], [rad]

    Notes
    -----
    Three unknowns per point: :math:`u = \ln r_a` and the turns :math:`\theta_1, \theta_3`
    (:math:`\theta_2 = \Delta i - \theta_1 - \theta_3`); burn :math:`k` costs
    :math:`\sqrt{(v_k' - v_k)^2 + 4 v_k v_k' \sin^2(\theta_k / 2)}` (:func:`combined_burn`), and the
    three burns lie on the line of apsides, so the turns add. The cost is not convex: a burn that
    only turns costs :math:`2 v \sin(\theta/2)`, concave, and with :math:`r_p = r_t` and a low
    bound the best split can jump from one burn to another. So the search is global first:

    1. a scan of 5 apoapses, log-spaced with the ends exact; at each, every split of the turn in
       steps of :math:`\Delta i / 20` (231 splits; each burn's cost is tabulated at the 21 turns
       once and a split is a sum of three table entries). The 3 splits that turn with one burn
       only (exact where they win) are kept apart from the others, and the cheapest of the others
       is refined by 2 rounds of golden-section search ([3]_, 12 steps each) along three
       directions in turn (the first burn against the apoapsis burn, the third against it, the
       first against the third), within a bracket of one scan step about the current split, halved
       each round; a result replaces the split only where it costs less. The better of the two
       is that apoapsis's split. Kept apart since a one-burn corner can beat the scan's nearby
       splits while a narrow valley of splits between them beats the corner.
    2. from the best of those, 2 rounds of: golden-section search along the apoapsis (half a scan
       step either side, then a quarter), then one round of the split search there.
    3. the coplanar plan's apoapsis with the whole turn at apoapsis, where that is cheaper still.

    It is a joint search, not a split at the coplanar plan's apoapsis: with :math:`r_p = r_t` the
    coplanar total does not depend on :math:`r_a`, the plan takes the lowest, and a turn is cheap
    only at a high one. The total depends on the arrival speed through the first burn (its turn),
    so the search runs per arrival speed. Tested against a dense brute force.
    """
    far = target_radius if target_apoapsis is None else target_apoapsis
    start = upper_radius if apoapsis_radius is None else apoapsis_radius
    inputs = [np.asarray(x, dtype=float) for x in
              (v_inf, gm, periapsis_radius, target_radius, upper_radius, plane_change, far, start)]
    shape = np.broadcast_shapes(*(x.shape for x in inputs))
    arrays = np.broadcast_arrays(*(np.atleast_1d(x) for x in inputs))
    size = arrays[0].size
    found = np.empty((3, size))
    # Blocks of points, gathered from the broadcast inputs: the search holds some 70 arrays of a
    # block at once (the scan's tables), so memory stays bounded whatever the chunk, and a block
    # stays in cache.
    for begin in range(0, size, _TURN_BLOCK):
        index = np.unravel_index(np.arange(begin, min(begin + _TURN_BLOCK, size)), arrays[0].shape)
        found[:, begin:begin + _TURN_BLOCK] = _three_burn_turn_block(*(x[index] for x in arrays),
                                                                     elliptical=target_apoapsis is not None)
    return tuple(x.reshape(shape) for x in found)


def _three_burn_turn_block(v_inf, gm, periapsis_radius, target_radius, upper_radius, plane_change, far, start,
                           elliptical):
    """:func:`best_three_burn_turn` on 1-D arrays of equal length: (apoapsis, first, third) stacked."""
    lower = np.maximum(periapsis_radius, far)
    upper = np.maximum(upper_radius, lower)
    low_u, high_u = np.log(lower), np.log(upper)

    def radius_of(log_radius):
        # the ends exactly (the plan's apoapsis is often one) and never beyond them by a rounding of exp(log(.))
        return np.where(log_radius <= low_u, lower,
                        np.where(log_radius >= high_u, upper, np.clip(np.exp(log_radius), lower, upper)))

    def terms(log_radius):
        radius = radius_of(log_radius)
        pairs = _three_burn_speeds(v_inf, gm, periapsis_radius, target_radius, radius, far if elliptical else None)
        return [((after - before) ** 2, 4.0 * before * after) for before, after in pairs]

    def cost(burn_terms, first, third):
        turns = (first, plane_change - first - third, third)
        return sum(_burn_cost(burn, turn) for burn, turn in zip(burn_terms, turns, strict=True))

    step_u = (high_u - low_u) / (_TURN_SCAN_APOAPSES - 1)
    step_share = plane_change / _TURN_SCAN_SPLITS
    best, best_cost = None, None
    for fraction in np.linspace(0.0, 1.0, _TURN_SCAN_APOAPSES):
        log_radius = low_u + (high_u - low_u) * fraction
        here = terms(log_radius)
        (split, split_cost), (corner, corner_cost) = _scan_split(here, step_share)
        split, split_cost = _refine_split(lambda first, third, here=here: cost(here, first, third), split, split_cost,
                                          plane_change, step_share, _TURN_ROUNDS)
        split, split_cost = _keep_cheaper(split, split_cost, corner, corner_cost)
        point = [log_radius, *split]
        best, best_cost = (point, split_cost) if best is None else _keep_cheaper(best, best_cost, point, split_cost)
    for round_ in range(_TURN_ROUNDS):
        reach = 0.5 ** (round_ + 1) * step_u
        u, first, third = best

        def along(t, u=u, first=first, third=third):
            return cost(terms(u + t), first, third)

        t = _golden_section(along, -np.minimum(u - low_u, reach), np.minimum(high_u - u, reach), _TURN_GOLDEN_STEPS)
        best, best_cost = _keep_cheaper(best, best_cost, [u + t, first, third], along(t))
        here = terms(best[0])  # the burns' speeds at the apoapsis chosen so far: the split moves alone
        split, best_cost = _refine_split(lambda first, third, here=here: cost(here, first, third), best[1:],
                                         best_cost, plane_change, 0.5 ** (round_ + 1) * step_share, 1)
        best = [best[0], *split]
    zero = np.zeros_like(plane_change)
    plan = [np.log(np.clip(start, lower, upper)), zero, zero]
    best, best_cost = _keep_cheaper(best, best_cost, plan, cost(terms(plan[0]), zero, zero))
    u, first, third = best
    radius = radius_of(u)
    invalid = np.isnan(upper) | np.isnan(best_cost)
    return np.where(invalid, np.nan, np.stack([radius, first, third]))


def _burn_cost(terms, turn):
    """One burn of a turning sequence from its terms ((v' - v)^2, 4 v v'): :func:`combined_burn`'s formula."""
    square, product = terms
    return np.sqrt(square + product * np.sin(0.5 * turn) ** 2)


def _scan_split(terms, step):
    """
    Splits of ``_TURN_SCAN_SPLITS`` steps of turn over three burns with these terms, each burn's
    cost tabulated once: ([first, third], total) of the cheapest split that turns with more than
    one burn, and of the cheapest that turns with one only (a corner of the simplex: exact, and
    kept apart so that a corner does not hide a narrow valley of splits beside it).
    """
    count = _TURN_SCAN_SPLITS
    tables = [[_burn_cost(burn, step * k) for k in range(count + 1)] for burn in terms]
    corners = [((count, 0), tables[0][count] + tables[1][0] + tables[2][0]),
               ((0, 0), tables[0][0] + tables[1][count] + tables[2][0]),
               ((0, count), tables[0][0] + tables[1][0] + tables[2][count])]
    inner = [(first, third) for first in range(count + 1) for third in range(count + 1 - first)
             if (first, third) not in ((count, 0), (0, 0), (0, count))]
    found = []
    for candidates in (inner, corners):
        best_cost, best_first, best_third = None, np.zeros(step.shape), np.zeros(step.shape)
        for item in candidates:
            (first, third), total = item if candidates is corners else (item, None)
            if total is None:
                total = tables[0][first] + tables[2][third]
                total += tables[1][count - first - third]
            if best_cost is None:
                best_cost, best_first[...], best_third[...] = total, first, third
                continue
            cheaper = total < best_cost
            np.copyto(best_cost, total, where=cheaper)
            np.copyto(best_first, first, where=cheaper)
            np.copyto(best_third, third, where=cheaper)
        found.append(([best_first * step, best_third * step], best_cost))
    return found


def _refine_split(cost, split, split_cost, plane_change, width, rounds):
    """
    Golden-section search ([3]_) from ``split`` = [first, third] along three directions in turn
    (first burn against apoapsis burn, third against it, first against third), within ``width``
    either side, halved each of ``rounds``; a result replaces the split only where it costs less.
    """
    for round_ in range(rounds):
        reach = 0.5**round_ * width
        for direction in ((1.0, 0.0), (0.0, 1.0), (1.0, -1.0)):
            first, third = split
            rest = plane_change - first - third
            below, above = {(1.0, 0.0): (first, rest), (0.0, 1.0): (third, rest)}.get(direction, (first, third))

            def moved(t, first=first, third=third, direction=direction):
                return [first + direction[0] * t, third + direction[1] * t]

            t = _golden_section(lambda t: cost(*moved(t)), -np.minimum(below, reach), np.minimum(above, reach),
                                _TURN_GOLDEN_STEPS)
            split, split_cost = _keep_cheaper(split, split_cost, moved(t), cost(*moved(t)))
    return split, split_cost


def _keep_cheaper(best, best_cost, point, point_cost):
    """The point (a list of arrays) where it costs less than the best so far, elementwise."""
    cheaper = point_cost < best_cost
    return [np.where(cheaper, x, y) for x, y in zip(point, best, strict=True)], np.where(cheaper, point_cost, best_cost)


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
