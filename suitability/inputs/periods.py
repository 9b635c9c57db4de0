"""Multi-year series to a monthly climatology over a period of years, for any reader and any CF calendar.

A reader returns a monthly layer either as 12 months (``month`` 1..12) or, for a multi-year series, with a
decoded ``time`` axis (numpy datetime64 for the standard calendars, cftime objects for noleap/365_day,
360_day, all_leap/366_day and the others; xarray and cftime decode them, nothing is computed by hand here).
:func:`to_climatology` turns the series into the 12-month climatology the model takes:

- the steps of the period ``[first, last]`` (whole calendar years, inclusive) are kept; the default is the
  whole file, with a :class:`ShortPeriodWarning` when that spans fewer than 10 years;
- monthly steps: the mean of each calendar month over the years; daily steps: the mean over every day of
  each calendar month in the period. Every canonical monthly quantity is a mean (the mean of the daily
  minima for ``tmin``, of the daily maxima for ``tmax``, mean daily radiation, and rainfall as a mean daily
  rate in mm d-1, i.e. the monthly sum divided by the days of the month), so one mean serves every layer.
  Averaging the days directly weights each month by its days, which is the monthly total divided by the
  total days, the same quantity practice computes as "sum per month, then mean over years" up to the
  weight of a leap February;
- everything stays lazy, without dask (the caller chunks the result): whatever window of the result is
  read reads only its own window of the series, some time steps at a time, adding each month's values and
  counts (memory does not grow with the length of the series).

Decisions (the issue was silent):
- A file of 12 steps holding each month once is a climatology already (often stamped with a placeholder
  year): it is used as it is and a ``period`` is not applied to it (recorded as such). A file of 12 steps
  or fewer that is not (a month missing or repeated) is refused as a faulty 12-month file.
- A period must lie within the file's years; a partial overlap is refused rather than silently shortened.
- Sub-daily steps are refused (the mean of 6-hourly temperatures is not a daily minimum).
- Multi-year means of a month weight each year equally for monthly data (a leap February counts as one
  February).
"""

from __future__ import annotations

import warnings
from dataclasses import dataclass

import numba
import numpy as np
import xarray as xr
from xarray.backends import BackendArray
from xarray.core import indexing

from ..errors import InputDataError
from .native import MONTHS

#: Fewer years than this in a whole-file climatology gives a :class:`ShortPeriodWarning` (WMO climate
#: normals are 30 years; 10 is our own floor for a usable mean, common practice, no source).
MIN_YEARS = 10


class ShortPeriodWarning(UserWarning):
    """A layer's climatology rests on fewer than :data:`MIN_YEARS` years."""


@dataclass(frozen=True)
class TimeInfo:
    """What a layer's time axis was and which years made its climatology.

    steps: "climatology" (12 months as given), "monthly" or "daily". calendar: the CF calendar
    ("standard", "noleap", "360_day", ...; None for a ``month`` dimension or undecoded 12-step axis).
    period: (first, last) year used, None for a 12-step climatology. years: number of years used.
    time_steps: number of time steps read (before the period was applied).
    """

    steps: str
    calendar: str | None
    period: tuple[int, int] | None
    years: int
    time_steps: int

    def describe(self) -> str:
        """One line for ``check`` and the manifest."""
        calendar = f", {self.calendar} calendar" if self.calendar else ""
        if self.steps == "climatology":
            return f"12-month climatology as given{calendar}"
        first, last = self.period
        return f"{self.steps} series{calendar}, {first}-{last} ({self.years} years) -> monthly climatology"

    def as_record(self) -> dict:
        return {"steps": self.steps, "calendar": self.calendar, "period": list(self.period) if self.period else None,
                "years": self.years, "time_steps": self.time_steps, "method": self.describe()}


def calendar_of(time: xr.DataArray) -> str:
    """The CF calendar of a decoded time coordinate."""
    calendar = time.encoding.get("calendar")
    if calendar:
        return str(calendar)
    if np.issubdtype(time.dtype, np.datetime64):
        return "standard"
    first = time.values.flat[0]
    return str(getattr(first, "calendar", "") or "standard")


def to_climatology(data: xr.DataArray, period: tuple[int, int] | None, where: str) -> tuple[xr.DataArray, TimeInfo]:
    """The monthly climatology (month 1..12, y, x) of ``data`` with a decoded ``time`` axis over ``period``.

    data: lazy (time, y, x); period: (first, last) whole years inclusive, None for the whole file;
    where: the file and layer, for messages. Raises InputDataError for a period outside the file's years,
    sub-daily steps, or a month with no step in the period.
    """
    time = data["time"]
    steps = int(time.size)
    calendar = calendar_of(time)
    years = np.asarray(time.dt.year.values, dtype=int)
    months = np.asarray(time.dt.month.values, dtype=int)
    days = np.asarray(time.dt.day.values, dtype=int)
    if steps == 12 and sorted(months.tolist()) == list(MONTHS):
        out = data.assign_coords(time=months).rename(time="month").sortby("month")
        return out, TimeInfo("climatology", calendar, None, 1, steps)
    if steps <= 12:  # one year or less: meant as 12 months, so say what is wrong with them
        _check_twelve_months(months, steps, where)
    stamps = years * 10000 + months * 100 + days
    if np.unique(stamps).size < steps:
        raise InputDataError(f"{where}: several time steps fall on the same day; expected monthly or daily steps")
    daily = np.unique(years * 100 + months).size < steps
    first_year, last_year = int(years.min()), int(years.max())
    if period is None:
        first, last = first_year, last_year
        count = last - first + 1
        if count < MIN_YEARS:
            warnings.warn(f"{where}: the climatology rests on {count} year(s) ({first}-{last}); "
                          f"{MIN_YEARS} or more are usual for a climate mean (set 'period' to choose the years)",
                          ShortPeriodWarning, stacklevel=3)
    else:
        first, last = period
        if first < first_year or last > last_year:
            raise InputDataError(f"{where}: period {first}-{last} is outside the file's years {first_year}-{last_year}; "
                                 "expected a period within them")
    keep = (years >= first) & (years <= last)
    kept = np.flatnonzero(keep)
    contiguous = kept.size and kept[-1] - kept[0] + 1 == kept.size  # a slice: each window read in one piece
    chosen = data.isel(time=slice(kept[0], kept[-1] + 1) if contiguous else kept)
    present = set(months[keep].tolist())
    if present != set(MONTHS):
        raise InputDataError(f"{where}: months {sorted(set(MONTHS) - present)} have no time step in {first}-{last}; "
                             "expected every month of the year")
    climatology = _monthly_means(chosen, months[keep])
    info = TimeInfo("daily" if daily else "monthly", calendar, (first, last), last - first + 1, steps)
    return climatology, info


def _monthly_means(series: xr.DataArray, months: np.ndarray) -> xr.DataArray:
    """The mean of each calendar month (month 1..12, y, x) of a (time, y, x) series, NaN skipped, lazily.

    months: the calendar month (1..12) of each time step. The result is lazy without dask (an xarray
    backend array, :class:`_MonthlyMeansOfSeries`): whatever window of it is read, only that window of the
    series is read and averaged, so the sample checks before a run read 64 small windows of a 30-year
    series instead of averaging all of it, and a run averages each block's series once. The same means as
    ``groupby("time.month").mean()``. (xarray's groupby, without the optional flox, sorts the steps by
    month first: a shuffle that held the whole series of a block in memory, 23 GB for 30 years of daily
    data on a 512 x 512 block.)
    """
    from .native import lazy_array

    coords = {name: series.coords[name] for name in ("y", "x") if name in series.coords}
    out = lazy_array(_MonthlyMeansOfSeries(series.transpose("time", "y", "x"), np.asarray(months)),
                     ("month", "y", "x"), {"month": np.arange(1, 13), **coords}, series.name)
    return out.rio.write_crs(series.rio.crs) if series.rio.crs is not None else out


#: Values of a series read at once while averaging a window (16e6 float32: 64 MB): a small window's whole
#: series is one read; a 512 x 512 block is read some 60 steps at a time.
_PIECE_VALUES = 16_000_000


class _MonthlyMeansOfSeries(BackendArray):
    """The monthly means (12, y, x) of a lazy (time, y, x) series, as an xarray backend array: reading
    ``[months, rows, columns]`` reads only those rows and columns of the series, some time steps at a time
    (:data:`_PIECE_VALUES`), and adds each month's valid values and their count in float64. Memory holds
    one piece of the window's series and the sums."""

    def __init__(self, series: xr.DataArray, months: np.ndarray):
        self.series, self.months = series, months
        self.shape = (12,) + tuple(series.shape[1:])
        self.dtype = np.dtype(np.float32)

    def __getitem__(self, key):
        return indexing.explicit_indexing_adapter(key, self.shape, indexing.IndexingSupport.BASIC, self._means)

    def _means(self, key: tuple) -> np.ndarray:
        month_key, row_key, column_key = key
        window = self.series[:, row_key, column_key]
        sums = np.zeros((12,) + window.shape[1:])
        counts = np.zeros((12,) + window.shape[1:], dtype=np.int32)
        steps = max(1, _PIECE_VALUES // max(1, int(np.prod(window.shape[1:]))))
        flat_sums, flat_counts = sums.reshape(12, -1), counts.reshape(12, -1)  # views: the loop fills them
        for start in range(0, window.shape[0], steps):
            piece = window[start:start + steps]
            # (piece.data would read a lazy piece to tell it from a dask one; chunks does not)
            block = piece.data.compute(scheduler="sync") if piece.chunks is not None else piece.values
            step_months = np.ascontiguousarray(self.months[start:start + steps], dtype=np.int64) - 1
            values = np.ascontiguousarray(block).reshape(block.shape[0], -1)
            _add_by_month(values, step_months, flat_sums, flat_counts)
        with np.errstate(invalid="ignore", divide="ignore"):
            means = np.where(counts > 0, sums / counts, np.nan).astype(np.float32)
        return means[month_key]


@numba.njit(nogil=True, cache=True)
def _add_by_month(values, month_index, sums, counts):  # pragma: no cover - compiled; tested through _means
    # Each step's finite values added to its month's float64 sums and counts, in one pass over the piece:
    # numpy needed a copy, a mask and a cast per month and piece (0.28 s for 360 steps of 512 x 512 cells).
    for step in range(values.shape[0]):
        month = month_index[step]
        for cell in range(values.shape[1]):
            value = values[step, cell]
            if np.isfinite(value):
                sums[month, cell] += value
                counts[month, cell] += 1


def _check_twelve_months(months: np.ndarray, steps: int, where: str) -> None:
    if steps != 12:
        raise InputDataError(f"{where}: the time axis has {steps} steps; expected 12 (one per month) or a "
                             "multi-year series")
    listed = [int(m) for m in months]
    missing = sorted(set(MONTHS) - set(listed))
    repeated = sorted({m for m in listed if listed.count(m) > 1})
    raise InputDataError(f"{where}: the 12 time steps are months {listed}; expected each month 1..12 once"
                         + (f" (missing {missing})" if missing else "") + (f" (repeated {repeated})" if repeated else ""))
