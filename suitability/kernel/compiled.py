"""The compiled daily canopy model of both pathways: the loops, around the physiology's own equations.

Every formula here is a call to an equation of :mod:`suitability.physiology` (compiled from the same
definition, :mod:`suitability.physiology.elementwise`); this module only arranges them for speed:

* cells are taken :data:`BATCH` at a time; per batch and month each cell's day is set up once
  (astronomy, clearness, diffuse share, radiation integrals, humidity: ``_setup_lane``), then each Gauss
  moment runs as one loop over the lanes with no data-dependent branches, so that LLVM vectorises it
  (the exponential, sine and cosine there are the polynomials of :mod:`~suitability.physiology.scalar_ops`);
* daylight moments t = 12 ± (N/2) x come in pairs with the same sun elevation, so the light climate is
  computed once per pair; the temperature-only terms of the leaf models come from tables
  (:mod:`.tables`);
* the functions marked ``@template`` name the leaf models' rates as the globals ``C3_RATES`` and
  ``C4_RATES``, and their acclimation to the growth temperature (``LeafModel.acclimate``, once per
  moment on the tabulated terms) as ``C3_ACCLIMATE`` and ``C4_ACCLIMATE``;
  :func:`suitability.physiology.elementwise.specialise` binds them to the registered models of a run
  and compiles one entry point per pair of models.

Each cell is computed independently, in a fixed order, with no reduction across cells: results are
bitwise identical whatever the block (chunk) size, the number of workers or the scheduler.
"""

from __future__ import annotations

import math

import numba
import numba.extending
import numpy as np

from ..physiology.atmosphere import (
    TEMPERATURE_RANGE_C,
    actual_vapour_pressure_from_deficit,
    actual_vapour_pressure_from_tmin,
    air_pressure_from_elevation,
    co2_partial_pressure_pa,
    o2_partial_pressure_pa,
    saturation_deficit,
)
from ..physiology.canopy import (
    canopy_light,
    daily_temperature,
    daylight_moment,
    night_moment,
    symmetric_moments,
    valid_day_inputs,
)
from ..physiology.elementwise import template
from ..physiology.energy import energy_limited_transpiration_mm
from ..physiology.light import (
    daily_clearness,
    daily_course_amplitude,
    day_length,
    daylight_integral_of_sin_elevation,
    diffuse_absorption,
    diffuse_fraction_daily,
    extraterrestrial_radiation,
    solar_declination,
    solar_elevation_terms,
)
from ..physiology.stomata import capacity_scale_given, ci_ratio_given
from ..physiology.water import leaf_transpiration, supply_limited_day

#: Cells per batch (a multiple of every SIMD width).
BATCH = 64

# Humidity input kinds.
HUMIDITY_FROM_TMIN, HUMIDITY_VPD, HUMIDITY_VAPOUR_PRESSURE = 0, 1, 2

# setup[field, lane]: the day of one cell and month
(_S_A, _S_B, _S_GLOBAL_AMPLITUDE, _S_DIFFUSE_AMPLITUDE, _S_TMIN, _S_TMAX, _S_DAY_LENGTH, _S_LAI, _S_E_KD,
 _S_HUMIDITY, _S_WATER, _S_CO2, _S_PRESSURE, _S_O2, _S_ENERGY, _S_C3_GROWTH, _S_C4_GROWTH) = range(17)
_N_SETUP = 17
# cells[field, lane]: what does not change with the month
_C_VALID, _C_LATITUDE, _C_LAI, _C_E_KD, _C_PRESSURE, _C_O2, _C_ELEVATION = range(7)
_N_CELL = 7
# acc[field, lane]; the first fields are also the rows of the kernel's output
A_C3_NET, A_C4_NET, A_C3_GROSS, A_C3_PHOTO, A_C4_GROSS, _A_BAD, _A_C3_WATER, _A_C4_WATER = range(8)
_N_ACC = 8
# moment[field, lane]
(_M_TEMPERATURE_AFTER, _M_TEMPERATURE_BEFORE, _M_SUNLIT_PAR, _M_SHADED_PAR, _M_SUNLIT_LAI,
 _M_SHADED_LAI) = range(6)
_N_MOMENT = 6
_T_LOW, _T_HIGH = TEMPERATURE_RANGE_C
_JIT = dict(inline="always", nogil=True, error_model="numpy", fastmath={"contract"}, _nrt=False)


def _stack_array(rows: int, dtype=numba.types.float64):
    """A compiled-only helper returning a (rows, BATCH) array of ``dtype`` (float64 in production; the
    float32 measurement, benchmarks/float32.py, binds float32 ones) on the stack of the caller.

    Stack memory cannot alias the tables or the outputs, so LLVM needs no run-time alias checks to
    vectorise the lane loops (with heap arrays it gives up: the table reads have no known bounds).
    """
    array_type = numba.types.Array(dtype, 2, "C")
    itemsize = np.dtype(str(dtype)).itemsize

    @numba.extending.intrinsic
    def stack_array(typingctx):
        def codegen(context, builder, signature, args):
            from numba.core import cgutils
            from numba.np.arrayobj import make_array, populate_array

            data = cgutils.alloca_once(builder, context.get_value_type(dtype), size=rows * BATCH)
            array = make_array(array_type)(context, builder)
            intp = context.get_value_type(numba.types.intp)
            populate_array(array, data=data, shape=cgutils.pack_array(builder, [intp(rows), intp(BATCH)]),
                           strides=cgutils.pack_array(builder, [intp(itemsize * BATCH), intp(itemsize)]),
                           itemsize=intp(itemsize), meminfo=None)
            return array._getvalue()

        return array_type(), codegen

    return stack_array


_setup_array = _stack_array(_N_SETUP)
_cell_array = _stack_array(_N_CELL)
_acc_array = _stack_array(_N_ACC)
_moment_array = _stack_array(_N_MOMENT)


@numba.njit(**_JIT)
def _lerp(table, row, fraction, term):
    low = table[term, row]
    return low + fraction * (table[term, row + 1] - low)


@numba.njit(**_JIT)
def _table_row(position, last_row):
    """The table row at or below ``position`` (in rows from the first), clamped to the last pair of rows,
    and the fraction of a step beyond it. (A separate function so that benchmarks/float32.py can bind one
    that keeps the fraction float32: float32 minus an integer is float64 in numba.)"""
    row = min(max(int(math.floor(position)), 0), last_row)
    return row, position - row


@numba.njit(**_JIT)
def _terms(table, row, fraction):
    """Every term of a pathway table (tables.PathwayTables.columns: one term per table row) at one
    temperature (a tuple of MAX_TERMS = 12 floats; the terms a model does not use are dead code after
    inlining)."""
    return (_lerp(table, row, fraction, 0), _lerp(table, row, fraction, 1), _lerp(table, row, fraction, 2),
            _lerp(table, row, fraction, 3), _lerp(table, row, fraction, 4), _lerp(table, row, fraction, 5),
            _lerp(table, row, fraction, 6), _lerp(table, row, fraction, 7), _lerp(table, row, fraction, 8),
            _lerp(table, row, fraction, 9), _lerp(table, row, fraction, 10), _lerp(table, row, fraction, 11))


@template
def _moment_rates(setup, lane, temperature, sunlit_par, shaded_par, sunlit_lai, shaded_lai, humidity_kind,
                  c3_stomatal, c3_constants, c3_table, c4_stomatal, c4_constants, c4_table, saturation,
                  table_start, table_inverse_step, last_row):
    """Canopy rates of both pathways at one moment [µmol m-2 ground s-1]: C3 net, gross,
    photorespiration, C4 net, gross, 1.0 where the moment is invalid (temperature out of range) else
    0.0, and the C3 and C4 canopy transpiration [mol H2O m-2 ground s-1]."""
    valid = temperature >= _T_LOW and temperature <= _T_HIGH
    t = temperature if valid else 25.0
    row, fraction = _table_row((t - table_start) * table_inverse_step, last_row)
    humidity = setup[_S_HUMIDITY, lane]
    vpd = humidity if humidity_kind == HUMIDITY_VPD else saturation_deficit(
        saturation[row] + fraction * (saturation[row + 1] - saturation[row]), humidity)
    water = setup[_S_WATER, lane]
    co2_ppm = setup[_S_CO2, lane]
    pressure = setup[_S_PRESSURE, lane]
    o2_pa = setup[_S_O2, lane]
    c3_ci_ppm = co2_ppm * ci_ratio_given(vpd, c3_stomatal)
    c4_ci_ppm = co2_ppm * ci_ratio_given(vpd, c4_stomatal)
    c3_co2_pa = co2_partial_pressure_pa(c3_ci_ppm, pressure)
    c4_co2_pa = co2_partial_pressure_pa(c4_ci_ppm, pressure)
    c3_scale = capacity_scale_given(water, c3_stomatal)
    c4_scale = capacity_scale_given(water, c4_stomatal)
    # The leaf-temperature terms from the tables, completed for the growth temperature of the cell and
    # month (acclimation; the identity for models without it).
    c3_terms = C3_ACCLIMATE(_terms(c3_table, row, fraction), c3_constants, setup[_S_C3_GROWTH, lane])  # noqa: F821
    c4_terms = C4_ACCLIMATE(_terms(c4_table, row, fraction), c4_constants, setup[_S_C4_GROWTH, lane])  # noqa: F821
    sun3 = C3_RATES(c3_terms, c3_constants, sunlit_par, c3_co2_pa, o2_pa, c3_scale)  # noqa: F821 (bound)
    shade3 = C3_RATES(c3_terms, c3_constants, shaded_par, c3_co2_pa, o2_pa, c3_scale)  # noqa: F821
    sun4 = C4_RATES(c4_terms, c4_constants, sunlit_par, c4_co2_pa, o2_pa, c4_scale)  # noqa: F821
    shade4 = C4_RATES(c4_terms, c4_constants, shaded_par, c4_co2_pa, o2_pa, c4_scale)  # noqa: F821
    return (sun3.net * sunlit_lai + shade3.net * shaded_lai,
            sun3.gross * sunlit_lai + shade3.gross * shaded_lai,
            sun3.photorespiration * sunlit_lai + shade3.photorespiration * shaded_lai,
            sun4.net * sunlit_lai + shade4.net * shaded_lai,
            sun4.gross * sunlit_lai + shade4.gross * shaded_lai,
            0.0 if valid else 1.0,
            leaf_transpiration(sun3.net, co2_ppm, c3_ci_ppm, vpd, pressure) * sunlit_lai
            + leaf_transpiration(shade3.net, co2_ppm, c3_ci_ppm, vpd, pressure) * shaded_lai,
            leaf_transpiration(sun4.net, co2_ppm, c4_ci_ppm, vpd, pressure) * sunlit_lai
            + leaf_transpiration(shade4.net, co2_ppm, c4_ci_ppm, vpd, pressure) * shaded_lai)


@template
def _light_of_pair(setup, moment, node, weight):
    """Sunlit and shaded absorbed PAR per leaf and leaf areas at t = 12 ± (N/2) x (the same sun
    elevation), and the temperatures of both moments, for every lane (canopy._canopy_rates)."""
    for lane in range(BATCH):
        afternoon, _ = daylight_moment(setup[_S_DAY_LENGTH, lane], node, weight)
        sin_b, temperature_after, temperature_before = symmetric_moments(
            setup[_S_A, lane], setup[_S_B, lane], setup[_S_TMIN, lane], setup[_S_TMAX, lane], afternoon)
        light = canopy_light(setup[_S_GLOBAL_AMPLITUDE, lane], setup[_S_DIFFUSE_AMPLITUDE, lane], sin_b,
                             setup[_S_LAI, lane], setup[_S_E_KD, lane])
        moment[_M_SUNLIT_PAR, lane] = light.sunlit_absorbed_per_leaf
        moment[_M_SHADED_PAR, lane] = light.shaded_absorbed_per_leaf
        moment[_M_SUNLIT_LAI, lane] = light.sunlit_lai
        moment[_M_SHADED_LAI, lane] = light.shaded_lai
        moment[_M_TEMPERATURE_AFTER, lane] = temperature_after
        moment[_M_TEMPERATURE_BEFORE, lane] = temperature_before


@template
def _dark_night(setup, moment, node, weight):
    """The night moment around midnight, with every leaf dark (canopy._dark_canopy_net: the dark leaf
    counts with the whole LAI)."""
    for lane in range(BATCH):
        hour, _ = night_moment(setup[_S_DAY_LENGTH, lane], node, weight)
        moment[_M_TEMPERATURE_AFTER, lane] = daily_temperature(setup[_S_TMIN, lane], setup[_S_TMAX, lane], hour)
        moment[_M_SUNLIT_PAR, lane] = 0.0
        moment[_M_SHADED_PAR, lane] = 0.0
        moment[_M_SUNLIT_LAI, lane] = setup[_S_LAI, lane]
        moment[_M_SHADED_LAI, lane] = 0.0


@template
def _integrate_batch(setup, moment, acc, humidity_kind, c3_stomatal, c3_constants, c3_table, c4_stomatal,
                     c4_constants, c4_table, saturation, table_start, table_inverse_step, day_nodes, day_weights,
                     night_nodes, night_weights):
    """Add every Gauss moment of the day and the night to acc (canopy._gauss_integral). ``day_nodes``
    are symmetric about 0 (numpy's leggauss); an odd middle node (x = 0) is counted once."""
    last_row = c3_table.shape[1] - 2
    n_day = day_nodes.shape[0]
    n_pairs = (n_day + 1) // 2
    n_day_moments = 2 * n_pairs
    for k in range(n_day_moments + night_nodes.shape[0]):
        daylight = k < n_day_moments
        if daylight:
            pair = k // 2
            afternoon = k % 2 == 0
            node = day_nodes[n_day - 1 - pair]
            weight = day_weights[n_day - 1 - pair]
            if afternoon:
                _light_of_pair(setup, moment, node, weight)
            elif n_day - 1 - pair == pair:
                weight = 0.0
            temperature_row = _M_TEMPERATURE_AFTER if afternoon else _M_TEMPERATURE_BEFORE
        else:
            point = k - n_day_moments
            node = night_nodes[point]
            weight = night_weights[point]
            _dark_night(setup, moment, node, weight)
            temperature_row = _M_TEMPERATURE_AFTER
        if daylight:  # separate lane loops, so that each has no branch inside (LLVM vectorises them)
            for lane in range(BATCH):
                _, seconds = daylight_moment(setup[_S_DAY_LENGTH, lane], node, weight)
                _accumulate(setup, moment, acc, lane, seconds, 1.0, temperature_row, humidity_kind, c3_stomatal,
                            c3_constants, c3_table, c4_stomatal, c4_constants, c4_table, saturation, table_start,
                            table_inverse_step, last_row)
        else:  # gross and photorespiration count in daylight only
            for lane in range(BATCH):
                _, seconds = night_moment(setup[_S_DAY_LENGTH, lane], node, weight)
                _accumulate(setup, moment, acc, lane, seconds, 0.0, temperature_row, humidity_kind, c3_stomatal,
                            c3_constants, c3_table, c4_stomatal, c4_constants, c4_table, saturation, table_start,
                            table_inverse_step, last_row)


@template
def _accumulate(setup, moment, acc, lane, seconds, gross_share, temperature_row, humidity_kind, c3_stomatal,
                c3_constants, c3_table, c4_stomatal, c4_constants, c4_table, saturation, table_start,
                table_inverse_step, last_row):
    """Add one moment's canopy rates of one lane, weighted by ``seconds``, to acc."""
    rates = _moment_rates(setup, lane, moment[temperature_row, lane], moment[_M_SUNLIT_PAR, lane],
                          moment[_M_SHADED_PAR, lane], moment[_M_SUNLIT_LAI, lane], moment[_M_SHADED_LAI, lane],
                          humidity_kind, c3_stomatal, c3_constants, c3_table, c4_stomatal, c4_constants, c4_table,
                          saturation, table_start, table_inverse_step, last_row)
    acc[A_C3_NET, lane] += seconds * rates[0]
    acc[A_C3_GROSS, lane] += gross_share * (seconds * rates[1])
    acc[A_C3_PHOTO, lane] += gross_share * (seconds * rates[2])
    acc[A_C4_NET, lane] += seconds * rates[3]
    acc[A_C4_GROSS, lane] += gross_share * (seconds * rates[4])
    acc[_A_BAD, lane] += rates[5]
    acc[_A_C3_WATER, lane] += seconds * rates[6]
    acc[_A_C4_WATER, lane] += seconds * rates[7]


@numba.njit(**_JIT)
def _fill_harmless(setup, lane):
    # A valid, finite day for lanes whose cell is invalid or beyond the last cell (result discarded).
    for field in range(_N_SETUP):
        setup[field, lane] = 1.0
    setup[_S_A, lane] = 0.0
    setup[_S_GLOBAL_AMPLITUDE, lane] = 0.0
    setup[_S_DIFFUSE_AMPLITUDE, lane] = 0.0
    setup[_S_TMIN, lane] = 20.0
    setup[_S_TMAX, lane] = 20.0
    setup[_S_DAY_LENGTH, lane] = 12.0
    setup[_S_E_KD, lane] = 0.5
    setup[_S_CO2, lane] = 400.0
    setup[_S_PRESSURE, lane] = 100.0
    setup[_S_O2, lane] = 21000.0


@template
def _setup_cell(cells, lane, cell, latitude, elevation, lai, co2_ppm, o2_percent):
    """The quantities of one cell that do not change with the month (canopy._prepare)."""
    pressure = air_pressure_from_elevation(elevation[cell])
    leaf_area = lai[cell]
    o2_pa = o2_partial_pressure_pa(o2_percent, pressure)
    valid = (pressure == pressure and latitude[cell] >= -90.0 and latitude[cell] <= 90.0 and leaf_area >= 0.0
             and leaf_area < np.inf and co2_ppm > 0.0 and o2_pa == o2_pa)
    cells[_C_VALID, lane] = 1.0 if valid else 0.0
    cells[_C_LATITUDE, lane] = latitude[cell]
    cells[_C_LAI, lane] = leaf_area if valid else 1.0
    cells[_C_E_KD, lane] = diffuse_absorption(leaf_area if valid else 1.0)
    cells[_C_PRESSURE, lane] = pressure
    cells[_C_O2, lane] = o2_pa
    cells[_C_ELEVATION, lane] = elevation[cell] if valid else 0.0


@template
def _setup_lane(setup, cells, lane, cell, month, tmin, tmax, shortwave, water, humidity, humidity_kind, season,
                day_of_year, declination, co2_ppm, growth, growth_defaults):
    """The day's quantities of one cell and month (canopy._prepare); False where the result is NaN.

    ``growth``: the growth temperature [°C] of every cell and month, (n, 12), used by both pathways; an
    empty (0, 12) array means each pathway's own default, ``growth_defaults`` = (C3, C4) [°C]."""
    t_low = tmin[cell, month]
    t_high = tmax[cell, month]
    daily_shortwave = shortwave[cell, month]
    w = water[cell, month]
    latitude_deg = cells[_C_LATITUDE, lane]
    leaf_area = cells[_C_LAI, lane]
    if not (cells[_C_VALID, lane] == 1.0 and season[cell, month] and w >= 0.0 and w <= 1.0
            and valid_day_inputs(t_low, t_high, daily_shortwave, latitude_deg, day_of_year, leaf_area,
                                 cells[_C_PRESSURE, lane])):
        return False
    if humidity_kind == HUMIDITY_VPD or humidity_kind == HUMIDITY_VAPOUR_PRESSURE:
        given = humidity[cell, month]
        if not (given >= 0.0 and given < np.inf):
            return False
        setup[_S_HUMIDITY, lane] = given
    else:
        setup[_S_HUMIDITY, lane] = actual_vapour_pressure_from_tmin(t_low)
    if growth.shape[0] > 0:
        growth_temperature = growth[cell, month]  # NaN makes NaN the results of the models that use it
        setup[_S_C3_GROWTH, lane] = growth_temperature
        setup[_S_C4_GROWTH, lane] = growth_temperature
    else:
        setup[_S_C3_GROWTH, lane] = growth_defaults[0]
        setup[_S_C4_GROWTH, lane] = growth_defaults[1]
    # the vapour pressure of the net radiation (canopy._prepare)
    vapour = setup[_S_HUMIDITY, lane] if humidity_kind != HUMIDITY_VPD else actual_vapour_pressure_from_deficit(
        t_low, t_high, setup[_S_HUMIDITY, lane])
    a, b = solar_elevation_terms(latitude_deg, declination)
    setup[_S_A, lane] = a
    setup[_S_B, lane] = b
    extraterrestrial = extraterrestrial_radiation(latitude_deg, day_of_year)
    clearness = daily_clearness(daily_shortwave, extraterrestrial)
    setup[_S_ENERGY, lane] = energy_limited_transpiration_mm(t_low, t_high, vapour, daily_shortwave, extraterrestrial,
                                                            cells[_C_ELEVATION, lane], cells[_C_PRESSURE, lane])
    setup[_S_GLOBAL_AMPLITUDE, lane] = daily_course_amplitude(
        daily_shortwave, daylight_integral_of_sin_elevation(latitude_deg, declination))
    setup[_S_DIFFUSE_AMPLITUDE, lane] = daily_course_amplitude(
        diffuse_fraction_daily(clearness) * daily_shortwave,
        daylight_integral_of_sin_elevation(latitude_deg, declination, 0.0))
    setup[_S_TMIN, lane] = t_low
    setup[_S_TMAX, lane] = t_high
    setup[_S_DAY_LENGTH, lane] = day_length(latitude_deg, day_of_year)
    setup[_S_LAI, lane] = leaf_area
    setup[_S_E_KD, lane] = cells[_C_E_KD, lane]
    setup[_S_WATER, lane] = w
    setup[_S_CO2, lane] = co2_ppm
    setup[_S_PRESSURE, lane] = cells[_C_PRESSURE, lane]
    setup[_S_O2, lane] = cells[_C_O2, lane]
    return True


@template
def _limit_by_water_supply(acc, lane, water, max_supply_mm, energy_limit_mm):
    """Both pathways' day under the soil's water supply (water.supply_limited_day, canopy._result)."""
    c3_net, c3_gross, c3_photo, _ = supply_limited_day(acc[A_C3_NET, lane], acc[A_C3_GROSS, lane],
                                                       acc[A_C3_PHOTO, lane], acc[_A_C3_WATER, lane], water,
                                                       max_supply_mm, energy_limit_mm)
    c4_net, c4_gross, _, _ = supply_limited_day(acc[A_C4_NET, lane], acc[A_C4_GROSS, lane], 0.0,
                                                acc[_A_C4_WATER, lane], water, max_supply_mm, energy_limit_mm)
    acc[A_C3_NET, lane] = c3_net
    acc[A_C3_GROSS, lane] = c3_gross
    acc[A_C3_PHOTO, lane] = c3_photo
    acc[A_C4_NET, lane] = c4_net
    acc[A_C4_GROSS, lane] = c4_gross


@template
def monthly_cells(tmin, tmax, shortwave, water, humidity, humidity_kind, latitude, elevation, lai, season, days,
                  co2_ppm, o2_percent, c3_stomatal, c3_constants, c3_table, c4_stomatal, c4_constants, c4_table,
                  saturation, table_start, table_inverse_step, day_nodes, day_weights, night_nodes, night_weights,
                  to_carbon, max_supply_mm, weights, growth, growth_defaults, out, totals):
    """Fill out[field, cell, month] with the first out.shape[0] of C3 net, C4 net, C3 gross, C3
    photorespiration, C4 gross [g C m-2 d-1], and add weights[month] x C3 gross and photorespiration of
    the season months to totals[0, cell] and totals[1, cell] [g C m-2]; ``to_carbon`` converts µmol CO2
    to g C; ``max_supply_mm`` is the soil's water supply at field capacity [mm d-1]; ``growth`` and
    ``growth_defaults`` the growth temperatures (:func:`_setup_lane`). The entry point that
    :func:`suitability.physiology.elementwise.specialise` compiles."""
    n = tmin.shape[0]
    setup = _setup_array()
    cells = _cell_array()
    moment = _moment_array()
    acc = _acc_array()
    for start in range(0, n, BATCH):
        for lane in range(BATCH):
            if start + lane < n:
                _setup_cell(cells, lane, start + lane, latitude, elevation, lai, co2_ppm, o2_percent)
            else:
                cells[_C_VALID, lane] = 0.0
        for month in range(days.shape[0]):
            day_of_year = days[month]
            declination = solar_declination(day_of_year)
            any_valid = False
            for lane in range(BATCH):
                cell = start + lane
                valid = declination == declination and cells[_C_VALID, lane] == 1.0 and _setup_lane(
                    setup, cells, lane, cell, month, tmin, tmax, shortwave, water, humidity, humidity_kind, season,
                    day_of_year, declination, co2_ppm, growth, growth_defaults)
                if not valid:
                    _fill_harmless(setup, lane)
                for field in range(_N_ACC):
                    acc[field, lane] = 0.0
                acc[_A_BAD, lane] = 0.0 if valid else 1.0
                any_valid = any_valid or valid
            if any_valid:  # a batch of nodata or out-of-season cells is not computed at all
                _integrate_batch(setup, moment, acc, humidity_kind, c3_stomatal, c3_constants, c3_table,
                                 c4_stomatal, c4_constants, c4_table, saturation, table_start, table_inverse_step,
                                 day_nodes, day_weights, night_nodes, night_weights)
            for lane in range(min(BATCH, n - start)):
                cell = start + lane
                _limit_by_water_supply(acc, lane, setup[_S_WATER, lane], max_supply_mm, setup[_S_ENERGY, lane])
                good = acc[_A_BAD, lane] == 0.0
                for field in range(out.shape[0]):
                    out[field, cell, month] = acc[field, lane] * to_carbon if good else np.nan
                if season[cell, month]:  # as np.where(in_season, days * daily, 0).sum(): NaN propagates
                    totals[0, cell] += weights[month] * (acc[A_C3_GROSS, lane] * to_carbon if good else np.nan)
                    totals[1, cell] += weights[month] * (acc[A_C3_PHOTO, lane] * to_carbon if good else np.nan)
