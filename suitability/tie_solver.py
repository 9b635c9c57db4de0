"""A vectorised bracketing solver for the canopy crossover: where a month's C3/C4 outcome flips with temperature.

:mod:`suitability.model` asks, for every cell and season month at once, at which monthly mean temperature
the month's own advantage index (:func:`suitability.indicators.advantage_index` of the two daily canopies)
crosses the class margin, with everything else of the cell and month held (radiation, day length, air
pressure, water, humidity input, CO2). The model is a black box here: ``excess(offsets, active)`` returns
g = advantage − margin for the month-mean temperature shifted by ``offsets`` [°C] (the daily minimum and
maximum shifted together), for the ``active`` elements (NaN elsewhere), by whichever engine the run uses.

The month's own result (offset 0) is known from the model pass. The tie reported is the nearest one on
the side that result points to: a month in which C4 is favoured (g > 0) is searched downward for the
first temperature where it is not, any other month upward for the first temperature where C4 is
favoured. So by construction a month is C4-favoured exactly when its mean temperature is above its tie,
even where the advantage does not change monotonically with temperature (then the tie is the nearest of
several). Steps:

1. bracket: first ±2 °C; then the line through the last two points is extrapolated to its zero and the
   next point put a little beyond it (:data:`OVERSHOOT`), where that line heads for zero, otherwise
   the distance doubles; every step at least :data:`MIN_STEP_C` and at most :data:`MAX_STEP_C`, capped
   at the search limit; one model pass per step on the elements still unbracketed. A band of
   temperatures narrower than 6 °C in which the outcome flips and flips back can be stepped over (then
   the next tie beyond it, or none, is reported): C4's own decline above about 36 °C (Collatz et al.
   1992 high-temperature term) makes such bands where a cool month is searched upward;
2. refine: the Illinois variant of regula falsi (Dowell & Jarratt 1971, BIT 11:168) on every bracket at
   once, one model pass per iteration, until the bracket is narrower than :data:`TOLERANCE_C`; each new
   point at least half the tolerance inside the bracket (Dekker's minimum step), so that a root next to
   one end closes the bracket instead of being approached from one side only. Two accelerations, as in
   Brent's method (Brent 1973, ch. 4): inverse quadratic interpolation through the bracket and the last
   point dropped where it falls inside the bracket, and a point aimed just past the estimate, away from
   the last point, when that point is within the tolerance of the estimate (one pass then closes it).

About 4 model passes per element on the synthetic benchmark region (`benchmarks/synthetic.py`, 1000²
cells sampled every 4th, warmest month): 3.9-4.5 for its 3 scenarios, against 4.5-5.8 with plain
doubling steps (2, 4, 8, 14, ... °C) and the Illinois steps alone.

No tie within the search limits: −inf where the month stays C4-favoured down to the lower limit, +inf where
it stays not C4-favoured (C3 favoured or contested) up to the upper limit; also where the model gives no
number (NaN) before a flip is found. Written by hand: scipy's brentq/bisect solve one scalar function at a
time, and here each evaluation is one model pass over every cell and month.
"""

from __future__ import annotations

from typing import Callable

import numpy as np

#: Width of the final bracket [°C]: the maps and briefs show 0.1 °C.
TOLERANCE_C = 0.02
#: First bracketing step [°C]; later steps are guided or doubled (module docstring), up to :data:`MAX_STEP_C`.
FIRST_STEP_C = 2.0
#: Largest bracketing step [°C].
MAX_STEP_C = 6.0
#: How far beyond the zero of the line through the last two bracketing points the next point goes, as a
#: share of the distance to it: a little beyond, so that it brackets the tie in one pass and leaves a
#: narrow bracket to refine.
OVERSHOOT = 0.15
#: Smallest bracketing step [°C] (also added to every guided step).
MIN_STEP_C = 2 * TOLERANCE_C
#: How far past its estimate the refinement aims, as a share of :data:`TOLERANCE_C`, when the point
#: evaluated last lies within the tolerance of the estimate.
AIM_PAST = 0.4
#: Most refinement passes (the Illinois method needs about 5-8 for 16 °C brackets to 0.02 °C).
MAX_REFINEMENTS = 24


def nearest_tie(excess: Callable[[np.ndarray, np.ndarray], np.ndarray], start: np.ndarray,
                lower: np.ndarray, upper: np.ndarray, counter: list | None = None) -> np.ndarray:
    """Offset [°C] of the nearest tie from 0 for every element (module docstring).

    excess: (offsets, active) -> g at those offsets, same shape; only ``active`` elements are used.
    start: g at offset 0 (the model pass); NaN elements are not searched and give NaN.
    lower, upper: the offsets searched, lower <= 0 <= upper, per element.
    counter: if given, one entry (the number of active elements) is appended per model pass.
    Returns the offset of the tie, −inf/+inf where none lies within the limits (module docstring).
    """
    start = np.asarray(start, np.float64)
    searched = np.isfinite(start)
    favoured = start > 0
    direction = np.where(favoured, -1.0, 1.0)
    limit = np.where(favoured, -np.asarray(lower, np.float64), np.asarray(upper, np.float64))  # distance >= 0
    result = np.full(start.shape, np.nan)
    none = np.where(favoured, -np.inf, np.inf)
    near, g_near = np.zeros(start.shape), start.copy()
    previous, g_previous = np.full(start.shape, np.nan), np.full(start.shape, np.nan)
    far, g_far = np.full(start.shape, np.nan), np.full(start.shape, np.nan)
    open_ = searched.copy()
    distance = np.full(start.shape, FIRST_STEP_C)
    while open_.any():
        distance = np.minimum(distance, limit)
        exhausted = open_ & (np.abs(near) >= limit)
        result[exhausted] = none[exhausted]
        open_ &= ~exhausted
        if not open_.any():
            break
        offsets = np.where(open_, direction * distance, 0.0)
        g = _call(excess, offsets, open_, counter)
        flipped = open_ & np.isfinite(g) & ((g > 0) != favoured)
        lost = open_ & ~np.isfinite(g)
        result[lost] = none[lost]
        far[flipped], g_far[flipped] = offsets[flipped], g[flipped]
        moved = open_ & ~flipped & ~lost
        previous[moved], g_previous[moved] = near[moved], g_near[moved]
        near[moved], g_near[moved] = offsets[moved], g[moved]
        open_ &= moved
        distance = _next_distance(np.abs(near), g_near, np.abs(previous), g_previous)
    bracketed = np.isfinite(far)
    result[bracketed] = _refine(excess, near, g_near, far, g_far, bracketed, counter, previous,
                                g_previous)[bracketed]
    return result


def _next_distance(near, g_near, previous, g_previous):
    """The next bracketing distance [°C] from 0: the line through the last two points extrapolated to its
    zero and :data:`OVERSHOOT` beyond it, where the line heads for zero; otherwise the doubling rule.
    Never more than :data:`MAX_STEP_C` beyond the last point, nor less than :data:`MIN_STEP_C`."""
    doubling = near + np.minimum(near, MAX_STEP_C)
    with np.errstate(invalid="ignore", divide="ignore"):
        to_zero = g_near * (near - previous) / (g_previous - g_near)  # > 0 where the line heads for zero
        guided = near + to_zero * (1.0 + OVERSHOOT) + MIN_STEP_C
    guided = np.where(np.isfinite(to_zero) & (to_zero > 0), guided, doubling)
    return np.clip(guided, near + MIN_STEP_C, near + MAX_STEP_C)


def _refine(excess, a, g_a, b, g_b, active, counter, c=None, g_c=None):
    """Illinois regula falsi on the brackets [a, b] (g(a) and g(b) on opposite sides of 0) of ``active``,
    b the point evaluated last, sped up by inverse quadratic interpolation through a, b and a third
    point (c, g_c; the last one dropped from the bracket) where that falls inside the bracket, and by
    aiming just past the estimate, away from b, when b is already within the tolerance of it.

    Works on the open brackets only: a bracket's final estimate is taken when it closes and the
    bracket leaves the arrays, so each pass costs in proportion to the brackets still open.
    Returns the estimate for ``active`` elements, NaN elsewhere."""
    result = np.full(a.shape, np.nan)
    which = np.flatnonzero(active)
    a, g_a, b, g_b = a[which], g_a[which], b[which], g_b[which]
    true_g_a = g_a.copy()  # the Illinois step halves g_a; the interpolation needs the values themselves
    c = np.full(a.shape, np.nan) if c is None else c[which]
    g_c = np.full(a.shape, np.nan) if g_c is None else g_c[which]
    step = 0.5 * TOLERANCE_C  # Dekker's minimum step
    for _ in range(MAX_REFINEMENTS):
        open_ = np.abs(b - a) > TOLERANCE_C
        if not open_.all():
            closed = ~open_
            result[which[closed]] = _final_estimate(a[closed], g_a[closed], b[closed], g_b[closed])
            which, a, g_a, b, g_b, true_g_a, c, g_c = (
                values[open_] for values in (which, a, g_a, b, g_b, true_g_a, c, g_c))
        if not which.size:
            return result
        low, high = np.minimum(a, b), np.maximum(a, b)
        with np.errstate(invalid="ignore", divide="ignore"):
            secant = b - g_b * (b - a) / (g_b - g_a)
            quadratic = _inverse_quadratic(a, true_g_a, b, g_b, c, g_c)
        estimate = np.where((quadratic > low) & (quadratic < high), quadratic,
                            np.where(np.isfinite(secant), secant, 0.5 * (a + b)))
        # Just past the estimate, away from b, when that stays within the tolerance of b: if the estimate
        # is that good, this one pass closes the bracket.
        past = estimate + np.sign(estimate - b) * AIM_PAST * TOLERANCE_C
        estimate = np.where(np.abs(past - b) <= TOLERANCE_C, past, estimate)
        # At least half the tolerance from either end (Dekker's minimum step), so that a root next to an
        # end closes the bracket in one more pass instead of creeping toward it.
        x = np.clip(estimate, low + step, high - step)
        g = _call_on(excess, x, which, result.shape, counter)
        g = np.where(np.isfinite(g), g, np.where(g_b > 0, g_b, g_a))  # a NaN inside a bracket: move toward it
        same_as_b = (g > 0) == (g_b > 0)
        # Illinois: when the new point falls on b's side twice, halve the stale end's value.
        c, g_c = np.where(same_as_b, b, a), np.where(same_as_b, g_b, true_g_a)  # the point dropped
        a, g_a, true_g_a = (np.where(same_as_b, a, b), np.where(same_as_b, 0.5 * g_a, g_b),
                            np.where(same_as_b, true_g_a, g_b))
        b, g_b = x, g
    result[which] = _final_estimate(a, g_a, b, g_b)
    return result


def _final_estimate(a, g_a, b, g_b):
    """The tie in a closed bracket: its secant point, or its middle where that falls outside."""
    with np.errstate(invalid="ignore", divide="ignore"):
        secant = b - g_b * (b - a) / (g_b - g_a)
    low, high = np.minimum(a, b), np.maximum(a, b)
    return np.where(np.isfinite(secant) & (secant >= low) & (secant <= high), secant, 0.5 * (a + b))


def _inverse_quadratic(a, g_a, b, g_b, c, g_c):
    """The zero of the quadratic x(g) through three points (Brent 1973, Algorithms for Minimization
    without Derivatives, ch. 4); NaN where two values coincide or c is missing."""
    return (a * g_b * g_c / ((g_a - g_b) * (g_a - g_c)) + b * g_a * g_c / ((g_b - g_a) * (g_b - g_c))
            + c * g_a * g_b / ((g_c - g_a) * (g_c - g_b)))


def _call_on(excess, x, which, shape, counter):
    """g at ``x`` for the elements ``which`` of arrays of ``shape`` (the others not computed)."""
    offsets = np.zeros(shape)
    offsets[which] = x
    active = np.zeros(shape, bool)
    active[which] = True
    return _call(excess, offsets, active, counter)[which]


def _call(excess, offsets, active, counter):
    if counter is not None:
        counter.append(int(np.count_nonzero(active)))
    return np.asarray(excess(offsets, active), np.float64)
