"""What a brief says in words, built only from the district table of :mod:`suitability.reports.zones`.

The region's numbers are sums of the district table's areas (shares are recomputed from the summed areas,
never averaged), so every number in a sentence is a number of a table the brief also prints:
:func:`region_table` for the headline, the district table for the districts that change most.

Words used throughout:
- "land with results": land whose class is C3 favoured, contested, C4 favoured or no growing season;
  class shares are of this land.
- "towards C4": a class move C3 -> contested, C3 -> C4 or contested -> C4 (towards C3 the reverse); moves
  into or out of the growing season are counted apart. Transition shares are of the whole district area,
  so the transition matrix sums to 100 %.
"""

from __future__ import annotations

import math
from collections.abc import Sequence
from dataclasses import dataclass

import pandas as pd

from suitability.reports.zones import (
    AREA_COLUMNS,
    DRAW_PROBABILITY,
    MEMBER_SHARE,
    MOSTLY,
    TRANSITION_CLASSES,
    transition_column,
)

#: Plain words for the classes of the transition accounting.
CLASS_WORDS = {"c3": "C3 favoured", "contested": "no clear advantage", "c4": "C4 favoured",
               "noseason": "no growing season", "nodata": "no results"}
#: Longest list of district names a sentence gives; the rest are counted and left to the appendix.
MAX_NAMES_IN_A_SENTENCE = 8


# --- words from numbers ----------------------------------------------------------------------------------

def percent_text(share: float, *, short: bool = False) -> str:
    """A share [0-1] as whole percent, e.g. 0.184 -> '18 %'; tiny non-zero shares as 'less than 1 %'
    (``short``: '<1 %'), shares just below 1 as 'more than 99 %' ('>99 %'); NaN as 'no data' ('\u2013')."""
    if not math.isfinite(share):
        return "\u2013" if short else "no data"
    if 0 < share < 0.005:
        return "<1 %" if short else "less than 1 %"
    if 0.995 <= share < 1:
        return ">99 %" if short else "more than 99 %"
    return f"{round(100 * share):d} %"


def hectares_text(hectares: float) -> str:
    """Hectares rounded to whole numbers with thousands separators, e.g. 12345.6 -> '12,346 ha'."""
    if not math.isfinite(hectares):
        return "\u2013"
    return f"{hectares:,.0f} ha"


def names_text(names: Sequence[str], limit: int = MAX_NAMES_IN_A_SENTENCE) -> str:
    """'A, B and C'; more than ``limit`` names: the first ``limit`` and 'N more (see the district table)'."""
    names = [str(n) for n in names]
    if len(names) > limit:
        return ", ".join(names[:limit]) + f" and {len(names) - limit} more (see the district table)"
    if len(names) <= 1:
        return "".join(names)
    return ", ".join(names[:-1]) + " and " + names[-1]


# --- scenarios in words ----------------------------------------------------------------------------------

def scenario_words(scenario, baseline=None) -> str:
    """A scenario in plain words: its description, or one made from its numbers (never its identifier).

    scenario: has ``name``, ``description``, ``co2_ppm``, ``temperature_offset_c``, ``is_baseline``.
    baseline: the baseline scenario, to say what changes against it.
    """
    if scenario.description:
        return scenario.description
    if scenario.is_baseline:
        return f"the present climate with {scenario.co2_ppm:g} ppm CO\u2082"
    parts = []
    if baseline is None or scenario.co2_ppm != baseline.co2_ppm:
        parts.append(f"CO\u2082 at {scenario.co2_ppm:g} ppm")
    if scenario.temperature_offset_c:
        parts.append(f"{abs(scenario.temperature_offset_c):g} \u00b0C "
                     f"{'warmer' if scenario.temperature_offset_c > 0 else 'cooler'}")
    return ", ".join(parts) or f"the climate of scenario {scenario.name}"


# --- the region's table ------------------------------------------------------------------------------------

def region_table(table: pd.DataFrame, districts: Sequence[str] | None = None) -> pd.DataFrame:
    """The districts' areas summed per scenario, with shares recomputed from the sums (index: scenario).

    Columns: every area column of the district table [ha], ``districts`` (count), ``district_area_ha``,
    ``results_ha`` (land with results), ``share_c3/contested/c4/noseason`` (of the land with results),
    ``results_share`` (of the district area), ``towards_c4_share`` / ``towards_c3_share`` (of the district
    area), ``members`` (ensemble size, NaN without one). Optional columns (ensembles, parameter draws)
    stay NaN where no district has them.
    """
    rows = table if districts is None else table[table["district"].isin(list(districts))]
    order = list(dict.fromkeys(rows["scenario"]))
    grouped = rows.groupby("scenario", sort=False)
    sums = grouped[[c for c in AREA_COLUMNS if c in rows]].sum(min_count=1)
    out = sums.copy()
    out["districts"] = grouped["district"].nunique()
    out["district_area_ha"] = grouped["district_area_ha"].sum()
    out["results_ha"] = out[["area_c3_ha", "area_contested_ha", "area_c4_ha", "area_noseason_ha"]].sum(axis=1)
    for key in ("c3", "contested", "c4", "noseason"):
        out[f"share_{key}"] = _ratio(out[f"area_{key}_ha"], out["results_ha"])
    out["results_share"] = _ratio(out["results_ha"], out["district_area_ha"])
    out["towards_c4_share"] = _ratio(out["towards_c4_ha"], out["district_area_ha"])
    out["towards_c3_share"] = _ratio(out["towards_c3_ha"], out["district_area_ha"])
    growing = ("c3", "contested", "c4")
    out["gains_season_ha"] = sum(out[transition_column("noseason", k)] for k in growing)
    out["loses_season_ha"] = sum(out[transition_column(k, "noseason")] for k in growing)
    out["members"] = grouped["members"].max()
    return out.loc[order]


def _ratio(numerator: pd.Series, denominator: pd.Series) -> pd.Series:
    return (numerator / denominator.where(denominator > 0)).astype("float64")


def transition_matrix(row: pd.Series) -> pd.DataFrame:
    """The 5 x 5 transition accounting of one row (a district's or the region's) [ha]: baseline class
    (rows) by scenario class (columns), labelled in words; it sums to the row's district area."""
    keys = list(TRANSITION_CLASSES)
    data = [[float(row[transition_column(b, a)]) for a in keys] for b in keys]
    labels = [CLASS_WORDS[k] for k in keys]
    return pd.DataFrame(data, index=pd.Index(labels, name="baseline"), columns=pd.Index(labels, name="scenario"))


# --- sentences --------------------------------------------------------------------------------------------

@dataclass(frozen=True)
class Sentence:
    """One sentence and the table cells its numbers come from: (table, row, column) -> shown value."""

    text: str
    sources: tuple[tuple[str, str, str, str], ...] = ()


def _share_of(value: float, total: float) -> float:
    return value / total if total > 0 else math.nan


def headline(region: pd.DataFrame, scenarios: Sequence, baseline, subject: str) -> list[Sentence]:
    """The regional headline: today's balance, then for each scenario the land moving towards C4 and
    towards C3, with agreement and uncertainty statements when the table has those columns.

    region: :func:`region_table`. scenarios: the scenarios to describe (ScenarioInfo-like), baseline
    included or not. subject: "the 100 districts of X" or a district's name.
    """
    b = region.loc[baseline.name]
    sentences = []
    if not b["results_ha"] > 0:
        return [Sentence(f"There are no results for {subject}.")]
    c4_today = percent_text(b["share_c4"])
    c3_today = percent_text(b["share_c3"])
    sentences.append(Sentence(
        f"Today ({scenario_words(baseline)}), C4 crops have the advantage on {c4_today} of the land with results "
        f"in {subject} and C3 crops on {c3_today} ({hectares_text(b['results_ha'])} with results, "
        f"{percent_text(b['results_share'])} of the area).",
        ((baseline.name, "share_c4", c4_today), (baseline.name, "share_c3", c3_today),
         (baseline.name, "results_ha", hectares_text(b["results_ha"])),
         (baseline.name, "results_share", percent_text(b["results_share"]))),
    ))
    if b["share_noseason"] > 0:
        text = percent_text(b["share_noseason"])
        sentences.append(Sentence(f"{text[0].upper()}{text[1:]} of the land with results has no growing season "
                                  "today (too cold or too dry in every month by the season rule).",
                                  ((baseline.name, "share_noseason", text),)))
    for scenario in scenarios:
        if scenario.name == baseline.name:
            continue
        sentences += scenario_sentences(region.loc[scenario.name], scenario, baseline)
    return sentences


def scenario_sentences(s: pd.Series, scenario, baseline) -> list[Sentence]:
    """Sentences for one scenario's row of :func:`region_table` (see :func:`headline`)."""
    name = scenario.name
    words = scenario_words(scenario, baseline)
    to_c4, to_c3 = hectares_text(s["towards_c4_ha"]), hectares_text(s["towards_c3_ha"])
    to_c4_share, to_c3_share = percent_text(s["towards_c4_share"]), percent_text(s["towards_c3_share"])
    c4_after = percent_text(s["share_c4"])
    out = [Sentence(
        f"In the scenario \u201c{words}\u201d, {to_c4} ({to_c4_share} of the area) move towards C4 crops and {to_c3} "
        f"({to_c3_share}) towards C3 crops; C4 crops then have the advantage on {c4_after} of the land with results.",
        ((name, "towards_c4_ha", to_c4), (name, "towards_c4_share", to_c4_share), (name, "towards_c3_ha", to_c3),
         (name, "towards_c3_share", to_c3_share), (name, "share_c4", c4_after)),
    )]
    if s["gains_season_ha"] > 0 or s["loses_season_ha"] > 0:
        gains, loses = hectares_text(s["gains_season_ha"]), hectares_text(s["loses_season_ha"])
        out.append(Sentence(f"Besides, {gains} gain a growing season and {loses} lose it.",
                            ((name, "gains_season_ha", gains), (name, "loses_season_ha", loses))))
    members = s.get("members", math.nan)
    if math.isfinite(members) and math.isfinite(s.get("agree_towards_c4_ha", math.nan)):
        n = int(members)
        k = math.ceil(MEMBER_SHARE * n - 1e-9)
        a4, a3 = hectares_text(s["agree_towards_c4_ha"]), hectares_text(s["agree_towards_c3_ha"])
        out.append(Sentence(
            f"In at least {k} of {n} climate models, the balance shifts towards C4 crops on {a4} and towards C3 "
            f"crops on {a3}, whether or not the favoured kind of crop changes; elsewhere the models disagree on "
            "the direction.",
            ((name, "agree_towards_c4_ha", a4), (name, "agree_towards_c3_ha", a3)),
        ))
    if math.isfinite(members) and math.isfinite(s.get("c4_most_members_ha", math.nan)):
        n = int(members)
        k = math.ceil(MEMBER_SHARE * n - 1e-9)
        most = hectares_text(s["c4_most_members_ha"])
        out.append(Sentence(f"C4 crops have the advantage in at least {k} of {n} climate models on {most}.",
                            ((name, "c4_most_members_ha", most),)))
    out += draw_sentences(s, name)
    return out


def draw_sentences(s: pd.Series, name: str) -> list[Sentence]:
    """Statements from the parameter-draw layers, only for the columns the row has."""
    out = []
    level = f"{DRAW_PROBABILITY:.0%}".replace("%", " %")
    if math.isfinite(s.get("c4_very_likely_ha", math.nan)):
        c4, c3 = hectares_text(s["c4_very_likely_ha"]), hectares_text(s["c3_very_likely_ha"])
        out.append(Sentence(
            f"Allowing for the uncertainty of the plant parameters, C4 crops have the advantage in at least "
            f"{level} of parameter draws on {c4}, and C3 crops or neither on {c3}.",
            ((name, "c4_very_likely_ha", c4), (name, "c3_very_likely_ha", c3)),
        ))
    if math.isfinite(s.get("towards_c4_very_likely_ha", math.nan)):
        moving = hectares_text(s["towards_c4_very_likely_ha"])
        out.append(Sentence(f"The balance moves towards C4 crops in at least {level} of paired parameter draws "
                            f"on {moving}.", ((name, "towards_c4_very_likely_ha", moving),)))
    if math.isfinite(s.get("class_change_very_likely_ha", math.nan)):
        changing = hectares_text(s["class_change_very_likely_ha"])
        out.append(Sentence(f"The favoured kind of crop changes in at least {level} of paired parameter draws "
                            f"on {changing}.", ((name, "class_change_very_likely_ha", changing),)))
    return out


# --- districts ---------------------------------------------------------------------------------------------

def largest_changes(table: pd.DataFrame, scenario: str, direction: str, count: int = 10) -> pd.DataFrame:
    """The ``count`` districts with the largest share of their area moving towards ``direction`` ("c4" or
    "c3") under ``scenario``, largest first (ties by area); districts where nothing moves are left out."""
    rows = table[table["scenario"] == scenario].copy()
    column = f"towards_{direction}_ha"
    rows["moving_share"] = rows[column] / rows["district_area_ha"].where(rows["district_area_ha"] > 0)
    rows = rows[rows[column] > 0]
    return rows.sort_values(["moving_share", column], ascending=False, kind="stable").head(count)


def flagged_districts(table: pd.DataFrame, baseline: str) -> dict[str, list[str]]:
    """Districts to read with care, from the baseline rows: mostly without results, mostly outside the
    growing season, partly or wholly off the grid (the same rules as the table's ``flag``)."""
    rows = table[table["scenario"] == baseline]
    return {
        "no results": list(rows.loc[rows["valid_share"] == 0, "district"]),
        "mostly without results": list(rows.loc[(rows["valid_share"] > 0) & (rows["valid_share"] < MOSTLY), "district"]),
        "mostly outside the growing season": list(rows.loc[rows["share_noseason"] > MOSTLY, "district"]),
    }


def flag_sentences(table: pd.DataFrame, baseline: str) -> list[Sentence]:
    """One sentence per kind of flag that applies, naming the districts (at most a few, then a count)."""
    found = flagged_districts(table, baseline)
    out = []
    if found["no results"]:
        names = found["no results"]
        out.append(Sentence(f"{len(names)} district{'s have' if len(names) > 1 else ' has'} no results at all "
                            f"(off the grid or without valid input): {names_text(names)}."))
    if found["mostly without results"]:
        names = found["mostly without results"]
        out.append(Sentence(f"{len(names)} district{'s have' if len(names) > 1 else ' has'} results on less than "
                            f"half of {'their' if len(names) > 1 else 'its'} area; read "
                            f"{'their' if len(names) > 1 else 'its'} shares with care: {names_text(names)}."))
    if found["mostly outside the growing season"]:
        names = found["mostly outside the growing season"]
        out.append(Sentence(f"{len(names)} district{'s are' if len(names) > 1 else ' is'} mostly outside the "
                            f"growing season today: {names_text(names)}."))
    return out


__all__ = ["CLASS_WORDS", "Sentence", "draw_sentences", "flag_sentences", "flagged_districts", "headline",
           "hectares_text", "largest_changes", "names_text", "percent_text", "region_table", "scenario_sentences",
           "scenario_words", "transition_matrix"]
