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

1. bracket: offsets ±2, ±4, ±8, ±14, ±20, ... °C (doubling up to steps of :data:`MAX_STEP_C`, capped
   at the search limit), one model pass per step on the elements still unbracketed. A band of
   temperatures narrower than 6 °C in which the outcome flips and flips back can be stepped over (then
   the next tie beyond it, or none, is reported): C4's own decline above about 36 °C (Collatz et al.
   1992 high-temperature term) makes such bands where a cool month is searched upward;
2. refine: the Illinois variant of regula falsi (Dowell & Jarratt 1971, BIT 11:168) on every bracket at
   once, one model pass per iteration, until the bracket is narrower than :data:`TOLERANCE_C`; each new
   point at least half the tolerance inside the bracket (Dekker's minimum step), so that a root next to
   one end closes the bracket instead of being approached from one side only.

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
#: First bracketing step [°C]; later steps double it, up to :data:`MAX_STEP_C`.
FIRST_STEP_C = 2.0
#: Largest bracketing step [°C].
MAX_STEP_C = 6.0
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
    far, g_far = np.full(start.shape, np.nan), np.full(start.shape, np.nan)
    open_ = searched.copy()
    position = FIRST_STEP_C
    while open_.any():
        distance = np.minimum(position, limit)
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
        near[moved], g_near[moved] = offsets[moved], g[moved]
        open_ &= moved
        position += min(position, MAX_STEP_C)
    bracketed = np.isfinite(far)
    result[bracketed] = _refine(excess, near, g_near, far, g_far, bracketed, counter)[bracketed]
    return result


def _refine(excess, a, g_a, b, g_b, active, counter):
    """Illinois regula falsi on the brackets [a, b] (g(a) and g(b) on opposite sides of 0) of ``active``."""
    a, g_a, b, g_b = a.copy(), g_a.copy(), b.copy(), g_b.copy()
    active = active.copy()
    for _ in range(MAX_REFINEMENTS):
        active &= np.abs(b - a) > TOLERANCE_C
        if not active.any():
            break
        with np.errstate(invalid="ignore", divide="ignore"):
            secant = b - g_b * (b - a) / (g_b - g_a)
        low, high = np.minimum(a, b), np.maximum(a, b)
        # At least half the tolerance from either end (Dekker's minimum step), so that a root next to an
        # end closes the bracket in one more pass instead of creeping toward it.
        step = 0.5 * TOLERANCE_C
        x = np.where(np.isfinite(secant), np.clip(secant, low + step, high - step), 0.5 * (a + b))
        x = np.where(active, x, 0.0)
        g = _call(excess, x, active, counter)
        g = np.where(np.isfinite(g), g, np.where(g_b > 0, g_b, g_a))  # a NaN inside a bracket: move toward it
        same_as_b = (g > 0) == (g_b > 0)
        # Illinois: when the new point falls on b's side twice, halve the stale end's value.
        new_a = np.where(same_as_b, a, b)
        new_g_a = np.where(same_as_b, 0.5 * g_a, g_b)
        a = np.where(active, new_a, a)
        g_a = np.where(active, new_g_a, g_a)
        b = np.where(active, x, b)
        g_b = np.where(active, g, g_b)
    with np.errstate(invalid="ignore", divide="ignore"):
        secant = b - g_b * (b - a) / (g_b - g_a)
    low, high = np.minimum(a, b), np.maximum(a, b)
    return np.where(np.isfinite(secant) & (secant >= low) & (secant <= high), secant, 0.5 * (a + b))


def _call(excess, offsets, active, counter):
    if counter is not None:
        counter.append(int(np.count_nonzero(active)))
    return np.asarray(excess(offsets, active), np.float64)
