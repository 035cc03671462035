"""Figures for the monthly review, computed from decision records.

Pure: no I/O, no clock. The input is a table of decisions, either the ledger's
:meth:`~ventsup.edges.ledger.Ledger.decisions_frame` layout or one built from
any iterable of :class:`~ventsup.core.state.Decision` (a replay, the ledger's
``decisions()``) with :func:`decisions_to_frame`, which also carries the input
values (facts) that the airflow, comfort and coverage figures need.
:func:`compute_figures` turns it into :class:`Figures`: tables per zone and for
the whole site, per day, per month and for the period, in the site's time zone.

How time is counted
-------------------
Each decision holds until the next decision of its zone, but for at most
``max_gap`` (default twice the controller tick); a longer gap counts as
*offline* from ``t + max_gap`` to the next decision. A ``start`` or ``stop``
event (when events are given) ends the decision before it at once. So an
urgent evaluation between ticks (an alarm, rain) weighs only the seconds it
really stood. Everything is clipped to the period ``start <= t < end``
[s since the epoch, UTC] and split at local hour boundaries, so that days and
months follow the site's wall clock (a day of 23 or 25 hours at the DST
changes; a 31-day month of 743 or 745 hours). Decisions before ``start`` in the
table are used only to cover the first seconds of the period, to count the
first actuator move, and to give the daily outdoor means that the running mean
needs (pass at least the seven days before the period for the first days'
adaptive limits).

Whole site
----------
Rows with ``zone == SITE`` describe the site: an hours figure is the time in
which *at least one* zone was in that state (the union, not the sum of zone
hours; comfort hours are the time in which every occupied zone was inside the
band); air volume, cooling and actuator moves are sums over the zones; the
peak airflow is the largest hourly mean of the summed zone flows. The TM52
assessment is per zone only.

Airflow and cooling estimate
----------------------------
From the commanded opening fractions, the opening geometry of the site config
and the measured temperatures and wind in each decision's facts
(see :class:`AirflowAssumptions` for every assumption and its source):

- *stack*, two levels open: the low and the high openings of a zone (each level
  in parallel, areas add) in series, 1/A² = 1/A_low² + 1/A_high², over the
  height between their area-weighted centres; the neutral plane lies between
  them, where the two flows balance (``physics.stack_flow`` with
  ``physics.effective_area_series``);
- *stack*, one level open: two-way flow through each open opening, with
  C_D = 0.40 + 0.0045·|ΔT| and the neutral plane at half the opening's height,
  taken as √(full area) (a square opening);
- *wind*: C_v·A·U, with A the windward openings (facing within 90° of the
  wind) in series with the leeward ones, C_v 0.5 within 45° of perpendicular
  and 0.3 for diagonal wind, U the measured wind speed; no cross path (all
  open openings on one side) gives no wind term. Unknown wind speed or
  direction: stack only (a lower estimate; the hours are reported as
  ``airflow_stack_only_hours``);
- combined as √(Q_stack² + Q_wind²); closed openings carry no air;
- heat: ρ·c_p·Q·(T_in − T_out) with ρ = 1.2 kg/m³ scaled to the site's
  elevation and c_p = 1005 J/(kg·K); positive parts are *cooling delivered*,
  negative parts *heat admitted*. Released openings (fire alarm) and unknown
  temperatures give no estimate, and the share of open time estimated is
  reported beside every airflow figure.

Comfort and overheating
-----------------------
The indoor air temperature of the decision (the zone's aggregate, e.g. the
warmest sensor) stands in for the operative temperature. Comfort hours count
occupied time only. The adaptive band is EN 16798-1:2019 category II by
default (or ASHRAE 55-2020 80 %); its running mean of outdoor temperature is
built from daily means of the ``temp_outdoor`` facts as EN 16798-1 says:
θ_rm,n = 0.2·θ_ed,n−1 + 0.8·θ_rm,n−1, started (and restarted after a missing
day) from the seven-day formula. A day whose outdoor temperature is known for
less than the coverage threshold has no daily mean, and is never filled. TM52
works on hourly values: an hour is occupied when occupied for at least half of
it and assessed when the indoor temperature is known for at least half of it.

Nomenclature of the tables
--------------------------
Column names carry their unit: ``_hours`` [h], ``_m3`` [m³], ``_m3s`` [m³/s],
``_cfm`` [ft³/min], ``_kwh`` [kWh], ``_ton_hours`` [ton·h of refrigeration],
``_c`` [°C], ``_kh`` [K·h], ``_share`` [0-1]; :data:`COLUMNS` documents each
column of the daily, monthly and totals tables.
"""

from __future__ import annotations

import datetime as dt
import json
import math
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass, field, fields
from typing import Any, Final, Literal, Protocol
from zoneinfo import ZoneInfo

import numpy as np
import numpy.typing as npt
import pandas as pd

from ventsup.config.model import Opening, SiteConfig
from ventsup.core import comfort, physics
from ventsup.core.state import Decision, Mode

__all__ = [
    "CAUSES",
    "COLUMNS",
    "COMPASS",
    "FACTS",
    "MODES",
    "SITE",
    "WIND_SPEED_EDGES",
    "AdaptiveModel",
    "AirflowAssumptions",
    "AirflowEstimate",
    "EventLike",
    "FigureOptions",
    "Figures",
    "adaptive_limits",
    "compute_figures",
    "decisions_to_frame",
    "running_mean_from_daily_means",
    "zone_airflow",
]

FloatArray = npt.NDArray[np.float64]
IntArray = npt.NDArray[np.int64]
BoolArray = npt.NDArray[np.bool_]
AdaptiveModel = Literal["en16798", "ashrae55"]

#: The zone name of the whole-site rows (not a valid zone name, so it never clashes).
SITE: Final = "(site)"
#: Every mode, in the order of the tables.
MODES: Final = tuple(mode.value for mode in Mode)
#: The causes whose hours are counted: what closed, capped, released or overrode openings.
CAUSES: Final = (
    "smoke",
    "rain",
    "wind",
    "cold",
    "actuator",
    "fault",
    "operator",
    "schedule",
    "interlock",
)
#: The facts read from each decision (``fact:<name>`` columns); true/false as 1.0/0.0.
FACTS: Final = (
    "temp_indoor",
    "temp_outdoor",
    "dew_point_outdoor",
    "co2",
    "heating",
    "occupied",
    "wind_speed",
    "wind_direction",
    "rain",
)
#: Sixteen compass sectors of 22.5°, the first centred on north.
COMPASS: Final = (
    "N",
    "NNE",
    "NE",
    "ENE",
    "E",
    "ESE",
    "SE",
    "SSE",
    "S",
    "SSW",
    "SW",
    "WSW",
    "W",
    "WNW",
    "NW",
    "NNW",
)
#: Lower edges of the wind-speed classes of the wind rose [m/s].
WIND_SPEED_EDGES: Final = (0.0, 4.0, 8.0, 12.0)

_HOUR: Final = 3600.0
_JOULES_PER_KWH: Final = 3.6e6
_KWH_PER_TON_HOUR: Final = physics.tons_to_watts(1.0) / 1000.0

_COLUMN_DOCS: dict[str, str] = {
    "hours": "[h] clock hours of the period in this row (23 or 25 on DST change days)",
    "online_hours": "[h] hours covered by decisions",
    "offline_hours": "[h] hours without decisions (gaps longer than max_gap, before a start)",
    "record_share": "[0-1] online_hours / hours",
    "record_flagged": "record_share below the coverage threshold",
    "open_hours": "[h] hours with any opening commanded open (for any cause)",
}
for _mode in MODES:
    _COLUMN_DOCS[f"mode_{_mode}_hours"] = f"[h] hours in mode {_mode}"
for _cause in CAUSES:
    _COLUMN_DOCS[f"cause_{_cause}_hours"] = (
        f"[h] hours decided by cause {_cause} (closed, capped, released or overridden)"
    )
_COLUMN_DOCS.update(
    {
        "air_volume_m3": "[m³] outdoor air through the openings (estimate)",
        "airflow_mean_m3s": "[m³/s] mean airflow while open and estimated",
        "airflow_mean_cfm": "[ft³/min] the same in cfm",
        "airflow_peak_m3s": "[m³/s] largest hourly mean airflow",
        "airflow_peak_cfm": "[ft³/min] the same in cfm",
        "airflow_estimated_hours": "[h] open hours with an airflow estimate",
        "airflow_stack_only_hours": "[h] of those, hours without wind data (stack only)",
        "airflow_known_share": "[0-1] airflow_estimated_hours / open_hours",
        "airflow_flagged": "airflow_known_share below the coverage threshold",
        "cooling_kwh": "[kWh] sensible heat removed by outdoor air cooler than indoors",
        "cooling_ton_hours": "[ton·h] the same in ton-hours of refrigeration",
        "heat_gain_kwh": "[kWh] sensible heat admitted while outdoors was warmer",
        "occupied_hours": "[h] occupied hours (schedule)",
        "occupancy_unknown_hours": "[h] hours whose record does not say if occupied",
        "comfort_known_hours": "[h] occupied hours with the indoor temperature known",
        "comfort_known_share": "[0-1] comfort_known_hours / (occupied + occupancy unknown)",
        "comfort_flagged": "comfort_known_share below the coverage threshold",
        "comfort_fixed_hours": "[h] occupied hours inside the fixed band (rules.comfort)",
        "comfort_fixed_below_hours": "[h] occupied hours below the fixed band",
        "comfort_fixed_above_hours": "[h] occupied hours above the fixed band",
        "adaptive_known_hours": "[h] occupied hours with temperature and adaptive band known",
        "adaptive_known_share": "[0-1] adaptive_known_hours / (occupied + occupancy unknown)",
        "adaptive_flagged": "adaptive_known_share below the coverage threshold",
        "comfort_adaptive_hours": "[h] occupied hours inside the adaptive band",
        "comfort_adaptive_below_hours": "[h] occupied hours below the adaptive band",
        "comfort_adaptive_above_hours": "[h] occupied hours above the adaptive band",
        "tm52_occupied_hours": "[h] occupied whole hours (TM52, hourly values)",
        "tm52_unknown_hours": "[h] whole hours whose occupancy is not recorded",
        "tm52_assessed_hours": "[h] of those, hours with temperature and running mean known",
        "tm52_known_share": "[0-1] tm52_assessed_hours / (tm52_occupied + tm52_unknown)",
        "tm52_flagged": "tm52_known_share below the coverage threshold",
        "overheating_hours": "[h] TM52 hours of exceedance: occupied hours with ΔT >= 1 K",
        "weighted_exceedance_max_kh": "[K·h] TM52 largest daily weighted exceedance Σ ΔT",
        "moves": "[1] actuator moves: changes of a commanded target, all openings",
        "travel": "[1] actuator travel: sum of |change of target|, in full strokes",
    }
)
#: Column -> "[unit] meaning" for the daily, monthly and totals tables.
COLUMNS: Final[Mapping[str, str]] = _COLUMN_DOCS

_SUM_HOURS: Final = tuple(
    name for name in _COLUMN_DOCS if name.endswith("_hours") and not name.endswith("_ton_hours")
)
_SUMS: Final = (*_SUM_HOURS, "air_volume_m3", "cooling_kwh", "heat_gain_kwh", "moves", "travel")
_MAXES: Final = ("airflow_peak_m3s", "weighted_exceedance_max_kh")


# --------------------------------------------------------------------------- options


@dataclass(frozen=True)
class AirflowAssumptions:
    """The assumptions of the airflow and cooling estimate, each with its source.

    Attributes
    ----------
    discharge_coefficient : float, default 0.65
        C_D of the openings for stack flow through low and high openings in
        series [1]; 0.65 is the effectiveness in the handbook's stack shortcut
        (ASHRAE Fundamentals), sharp-edged openings have about 0.61 (BS 5925).
    wind_effectiveness_perpendicular : float, default 0.5
        C_v for wind within 45° of the windward openings' normal [1]
        (ASHRAE Fundamentals: 0.5-0.6).
    wind_effectiveness_diagonal : float, default 0.3
        C_v for wind 45-90° off the normal [1] (ASHRAE Fundamentals: 0.25-0.35).
    wind_speed_factor : float, default 1.0
        Ratio of the wind speed at the openings to the measured one [1]; 1 takes
        the site's (rooftop) wind sensor as it is.
    density : float, default 1.2
        Air density at sea level [kg/m³], scaled by the standard pressure at the
        site's elevation (ASHRAE Fundamentals ch. 1 eq. 3).
    specific_heat : float, default 1005.0
        Specific heat of air [J/(kg·K)].
    """

    discharge_coefficient: float = 0.65
    wind_effectiveness_perpendicular: float = 0.5
    wind_effectiveness_diagonal: float = 0.3
    wind_speed_factor: float = 1.0
    density: float = 1.2
    specific_heat: float = 1005.0

    def describe(self) -> tuple[str, ...]:
        """The assumptions as sentences, for the report."""
        return (
            "Indoor air temperature stands in for operative temperature; the zone's "
            "aggregate temperature (e.g. the warmest sensor) is used.",
            "Stack flow with low and high openings open: the two levels in series "
            f"(1/A² = 1/A_low² + 1/A_high²), C_D {self.discharge_coefficient:g}, over the "
            "height between their centres; neutral plane between them "
            "(ASHRAE Fundamentals, ventilation and infiltration; BS 5925).",
            "Stack flow with one level open: two-way flow through each opening, "
            "C_D = 0.40 + 0.0045·|ΔT|, neutral plane at half the opening height, "
            "taken as the square root of its full area.",
            "Wind flow: C_v·A·U with the windward openings in series with the leeward "
            f"ones, C_v {self.wind_effectiveness_perpendicular:g} (within 45° of "
            f"perpendicular) or {self.wind_effectiveness_diagonal:g} (diagonal), "
            f"U = {self.wind_speed_factor:g} × the measured wind speed; none when all "
            "open openings face one side.",
            "Without wind speed or direction: stack flow only (a lower estimate).",
            "Wind and stack combined as the root of the sum of squares.",
            f"Heat: ρ·c_p·Q·ΔT, ρ {self.density:g} kg/m³ at sea level scaled to the "
            f"site's elevation, c_p {self.specific_heat:g} J/(kg·K); cooling counts "
            "only when outdoor air is cooler than indoors.",
        )


@dataclass(frozen=True)
class FigureOptions:
    """How the figures are computed.

    Attributes
    ----------
    tick : float or None
        The controller's tick [s]; None takes ``controller.tick`` of the config.
    max_gap : float or None
        Longest time a decision holds [s]; None is twice the tick.
    adaptive : {"en16798", "ashrae55"}
        The adaptive comfort model: EN 16798-1:2019 or ASHRAE 55-2020.
    category : {"I", "II", "III"}
        EN 16798-1 category (and the TM52 category), default II.
    acceptability : {80, 90}
        ASHRAE 55 band [%], default 80.
    coverage_threshold : float
        A figure whose inputs are known for less than this share is flagged [0-1].
    daily_mean_coverage : float
        A day's mean outdoor temperature (for the running mean) needs the
        temperature known for at least this share of the day [0-1]; 0.75 is
        18 hours. A day below it has no mean and is never filled in.
    airflow : AirflowAssumptions
        The assumptions of the airflow estimate.
    """

    tick: float | None = None
    max_gap: float | None = None
    adaptive: AdaptiveModel = "en16798"
    category: comfort.Category = "II"
    acceptability: Literal[80, 90] = 80
    coverage_threshold: float = 0.9
    daily_mean_coverage: float = 0.75
    airflow: AirflowAssumptions = field(default_factory=AirflowAssumptions)

    def adaptive_name(self) -> str:
        """The adaptive model in words, with its edition."""
        if self.adaptive == "ashrae55":
            return f"ASHRAE 55-2020 adaptive, {self.acceptability} % acceptability"
        return f"EN 16798-1:2019 adaptive, category {self.category}"


class EventLike(Protocol):
    """A recorded event, as :class:`ventsup.edges.ledger.EventRecord` has it."""

    @property
    def t(self) -> float: ...
    @property
    def kind(self) -> str: ...
    @property
    def zone(self) -> str | None: ...
    @property
    def who(self) -> str | None: ...
    @property
    def text(self) -> str: ...


# --------------------------------------------------------------------------- results


@dataclass(frozen=True)
class Figures:
    """Every figure of a report period; tables are pandas DataFrames.

    ``zone`` columns hold a zone name or :data:`SITE`. Dates are local
    ``YYYY-MM-DD`` strings, months ``YYYY-MM``, times seconds since the epoch.

    Attributes
    ----------
    totals, monthly, daily : DataFrame
        One row per zone and the site: for the period, per ``month``, per
        ``date``; columns in :data:`COLUMNS`.
    hourly : DataFrame
        ``zone, hour_start, date, hour, day, online_hours, open_hours,
        opening_fraction`` [0-1, area-weighted commanded opening],
        ``temp_indoor_c, temp_outdoor_c`` (hourly means over known values),
        ``air_volume_m3, airflow_mean_m3s`` (the hour's mean), ``occupied_hours``
        and the TM52 values ``temp_running_mean_c, temp_max_c, delta_t_k``
        [K, whole], ``tm52_occupied, tm52_unknown`` (occupancy not recorded),
        ``tm52_assessed, tm52_exceeded``; ``hour_start`` [s] is the local
        hour's start, ``hour`` its local hour of day, ``day`` the day of month.
    outdoor : DataFrame
        Per local date, from history and period: ``date, day_hours,
        temp_outdoor_mean_c, temp_outdoor_share, daily_mean_used,
        temp_running_mean_c, adaptive_lower_c, adaptive_upper_c, in_period``.
    moves : DataFrame
        ``zone, opening, date, month, moves, travel`` per opening and day.
    overheating : DataFrame
        Per zone: the TM52 assessment over the assessed occupied hours of the
        period (fields of :class:`~ventsup.core.comfort.OverheatingAssessment`,
        None when there is none), ``occupied_whole_hours``,
        ``occupancy_unknown_hours``, ``assessed_share``, ``flagged`` and
        ``note`` (why there is no assessment).
    coverage : DataFrame
        ``zone, input, configured, online_hours, known_hours, share_of_time,
        decisions, decisions_known, share_of_decisions, flagged, used_for``.
    outages : DataFrame
        ``zone, start, end, hours, note``: time without decisions.
    episodes : DataFrame
        ``zone, kind, start, end, hours, reason, reasons``: fire alarms,
        operator overrides and faults, from the decisions.
    events : DataFrame
        ``t, kind, zone, who, text``: the recorded events of the period, if given.
    wind : DataFrame
        ``zone, sector, direction, speed_class, speed_low, speed_high, hours``:
        hours decided by wind, by where the wind came from (sector -1 unknown).
    flags : tuple of str
        Every figure with poor coverage, in words.
    assumptions : tuple of str
        The assumptions behind the estimates, in words.
    """

    site: str
    time_zone: str
    units: Literal["SI", "IP"]
    start: float
    end: float
    tick: float
    max_gap: float
    adaptive_model: str
    coverage_threshold: float
    zones: tuple[str, ...]
    totals: pd.DataFrame
    monthly: pd.DataFrame
    daily: pd.DataFrame
    hourly: pd.DataFrame
    outdoor: pd.DataFrame
    moves: pd.DataFrame
    overheating: pd.DataFrame
    coverage: pd.DataFrame
    outages: pd.DataFrame
    episodes: pd.DataFrame
    events: pd.DataFrame
    wind: pd.DataFrame
    flags: tuple[str, ...]
    assumptions: tuple[str, ...]

    def tables(self) -> dict[str, pd.DataFrame]:
        """The tables by name, in the order a report lists them."""
        return {
            "totals": self.totals,
            "monthly": self.monthly,
            "daily": self.daily,
            "moves": self.moves,
            "overheating": self.overheating,
            "coverage": self.coverage,
            "outages": self.outages,
            "episodes": self.episodes,
            "events": self.events,
            "wind": self.wind,
            "outdoor": self.outdoor,
            "hourly": self.hourly,
        }

    def to_dict(self) -> dict[str, Any]:
        """Everything as JSON-ready lists and dicts (NaN as None)."""
        return {
            "site": self.site,
            "time_zone": self.time_zone,
            "units": self.units,
            "start": self.start,
            "end": self.end,
            "tick_s": self.tick,
            "max_gap_s": self.max_gap,
            "adaptive_model": self.adaptive_model,
            "coverage_threshold": self.coverage_threshold,
            "zones": list(self.zones),
            "columns": dict(COLUMNS),
            "flags": list(self.flags),
            "assumptions": list(self.assumptions),
            "tables": {name: _records(table) for name, table in self.tables().items()},
        }


def _records(table: pd.DataFrame) -> list[dict[str, Any]]:
    if table.empty:
        return []
    text = table.to_json(orient="records", double_precision=15)
    records: list[dict[str, Any]] = json.loads(text)
    return records


# --------------------------------------------------------------------------- frames


def _fact_value(value: object) -> float:
    if isinstance(value, bool):
        return 1.0 if value else 0.0
    if isinstance(value, int | float):
        return float(value)
    return math.nan


def decisions_to_frame(
    decisions: Iterable[Decision | tuple[Decision, str]], config: SiteConfig
) -> pd.DataFrame:
    """A decisions table in the ledger's ``decisions_frame`` layout, with facts.

    Parameters
    ----------
    decisions : iterable of Decision or (Decision, trigger)
        From a replay, or the ledger's ``decisions()`` pairs.
    config : SiteConfig
        The site; every opening of it gets a target column.

    Returns
    -------
    DataFrame
        ``t`` [s], ``zone``, ``mode``, ``layer`` (int), ``cause``, ``reason``,
        ``windows_open`` (bool), ``open_area`` [m²], one ``target:<opening>``
        column per opening of the site or seen (fraction 0-1, NaN when released
        or not in that decision), and one ``fact:<name>`` column per name of
        :data:`FACTS` (float, NaN when unknown, true/false as 1.0/0.0). Rows in
        the order given.
    """
    openings = {name for zone in config.zones.values() for name in zone.openings}
    t: list[float] = []
    zone: list[str] = []
    mode: list[str] = []
    layer: list[int] = []
    cause: list[str] = []
    reason: list[str] = []
    windows_open: list[bool] = []
    open_area: list[float] = []
    targets: list[Mapping[str, float | None]] = []
    facts: dict[str, list[float]] = {name: [] for name in FACTS}
    for item in decisions:
        decision = item[0] if isinstance(item, tuple) else item
        t.append(float(decision.t))
        zone.append(decision.zone)
        mode.append(str(decision.mode.value))
        layer.append(int(decision.layer))
        cause.append(str(decision.cause.value))
        reason.append(decision.reason)
        windows_open.append(bool(decision.windows_open))
        open_area.append(float(decision.open_area))
        targets.append(decision.targets)
        openings.update(decision.targets)
        for name in FACTS:
            facts[name].append(_fact_value(decision.facts.get(name)))
    frame = pd.DataFrame(
        {
            "t": pd.Series(t, dtype="float64"),
            "zone": pd.Series(zone, dtype=str),
            "mode": pd.Series(mode, dtype=str),
            "layer": pd.Series(layer, dtype="int64"),
            "cause": pd.Series(cause, dtype=str),
            "reason": pd.Series(reason, dtype=str),
            "windows_open": pd.Series(windows_open, dtype=bool),
            "open_area": pd.Series(open_area, dtype="float64"),
        }
    )
    columns: dict[str, FloatArray] = {}
    for name in sorted(openings):
        values = [target.get(name) for target in targets]
        columns[f"target:{name}"] = np.array(
            [math.nan if v is None else float(v) for v in values], dtype=np.float64
        )
    for name in FACTS:
        columns[f"fact:{name}"] = np.asarray(facts[name], dtype=np.float64)
    return pd.concat([frame, pd.DataFrame(columns, index=frame.index)], axis=1)


# --------------------------------------------------------------------------- physics


@dataclass(frozen=True)
class AirflowEstimate:
    """Airflow through a zone's openings, per decision [m³/s]; NaN when unknown."""

    flow: FloatArray
    stack: FloatArray
    wind: FloatArray


def _angle_off(direction: FloatArray, facing: float) -> FloatArray:
    """Angle between where the wind comes from and an opening's outward normal [deg, 0-180]."""
    return np.asarray(np.abs((direction - facing + 180.0) % 360.0 - 180.0), dtype=np.float64)


def _divide(numerator: FloatArray, denominator: FloatArray) -> FloatArray:
    result = np.full(np.broadcast(numerator, denominator).shape, np.nan)
    np.divide(numerator, denominator, out=result, where=denominator > 0.0)
    return result


def zone_airflow(
    openings: Mapping[str, Opening],
    targets: Mapping[str, npt.ArrayLike],
    temp_indoor: npt.ArrayLike,
    temp_outdoor: npt.ArrayLike,
    wind_speed: npt.ArrayLike,
    wind_direction: npt.ArrayLike,
    assumptions: AirflowAssumptions | None = None,
) -> AirflowEstimate:
    """Estimate the outdoor airflow through a zone's openings.

    Parameters
    ----------
    openings : mapping of str to Opening
        The zone's openings (area [m²], level, height [m], facing [deg]).
    targets : mapping of str to array
        Commanded fraction of each opening [0-1]; NaN (released) makes the
        estimate unknown. A missing opening counts as closed.
    temp_indoor, temp_outdoor : array
        Indoor and outdoor air temperature [°C]; NaN unknown.
    wind_speed : array
        Measured wind speed [m/s]; NaN unknown (stack only).
    wind_direction : array
        Where the wind comes from [deg from north]; NaN unknown (stack only).
    assumptions : AirflowAssumptions, optional
        Coefficients; see the class.

    Returns
    -------
    AirflowEstimate
        Combined, stack and wind flow [m³/s]; 0 when every opening is closed
        (whatever the temperatures), NaN when open with a temperature unknown or
        an opening released.

    Notes
    -----
    Two levels open: :math:`Q_s = C_D A_{eff} \\sqrt{2 g H \\Delta T / T_{warm}}`
    with :math:`1/A_{eff}^2 = 1/A_{low}^2 + 1/A_{high}^2` and H between the
    levels' area-weighted centres (equivalently the low openings' area over the
    height from them to the neutral plane). One level: two-way flow through each
    opening. Wind: :math:`Q_w = C_v A_w U`, :math:`A_w` windward in series with
    leeward. :math:`Q = \\sqrt{Q_s^2 + Q_w^2}`.

    References
    ----------
    .. [1] ASHRAE Handbook - Fundamentals, "Ventilation and Infiltration":
       stack flow (1997 ch. 25 eq. 37), two-way flow C_D, wind C_v, combined flow.
    .. [2] BS 5925:1991; MIL-HDBK-1011/2 App. C: openings in series.

    Examples
    --------
    >>> from ventsup.config.model import Opening
    >>> pair = {"low": Opening(area=1.0, facing=0, level="low", height=0.0),
    ...         "high": Opening(area=1.0, facing=0, level="high", height=3.0)}
    >>> one = np.array([1.0])
    >>> nan = np.array([np.nan])
    >>> estimate = zone_airflow(pair, {"low": one, "high": one}, [25.0], [15.0], nan, nan)
    >>> round(float(estimate.flow[0]), 4)
    0.6458
    """
    a = assumptions or AirflowAssumptions()
    t_in = np.atleast_1d(np.asarray(temp_indoor, dtype=np.float64))
    t_out = np.atleast_1d(np.asarray(temp_outdoor, dtype=np.float64))
    speed = np.atleast_1d(np.asarray(wind_speed, dtype=np.float64)) * a.wind_speed_factor
    direction = np.atleast_1d(np.asarray(wind_direction, dtype=np.float64))
    n = int(np.broadcast(t_in, t_out, speed, direction).shape[0])
    t_in, t_out, speed, direction = (
        np.broadcast_to(x, (n,)) for x in (t_in, t_out, speed, direction)
    )

    free: dict[str, FloatArray] = {}
    released = np.zeros(n, dtype=bool)
    for name, opening in openings.items():
        raw = targets.get(name)
        fraction = (
            np.zeros(n) if raw is None else np.broadcast_to(np.asarray(raw, dtype=np.float64), (n,))
        )
        released |= np.isnan(fraction)
        free[name] = opening.area * np.clip(np.nan_to_num(fraction, nan=0.0), 0.0, 1.0)
    any_open = np.zeros(n, dtype=bool)
    for area in free.values():
        any_open |= area > 0.0

    temps_known = np.isfinite(t_in) & np.isfinite(t_out)
    safe_in = np.where(temps_known, t_in, 20.0)
    safe_out = np.where(temps_known, t_out, 20.0)

    # --- stack: two levels in series, else two-way flow through each opening
    area_low = np.zeros(n)
    area_high = np.zeros(n)
    moment_low = np.zeros(n)
    moment_high = np.zeros(n)
    heights_known = all(opening.height is not None for opening in openings.values())
    for name, opening in openings.items():
        height = 0.0 if opening.height is None else opening.height
        if opening.level == "low":
            area_low += free[name]
            moment_low += free[name] * height
        else:
            area_high += free[name]
            moment_high += free[name] * height
    rise = _divide(moment_high, area_high) - _divide(moment_low, area_low)
    two_level = (
        heights_known
        & (area_low > 0.0)
        & (area_high > 0.0)
        & np.isfinite(rise)
        & (np.nan_to_num(rise, nan=0.0) > 0.0)
    )
    effective = np.asarray(physics.effective_area_series([area_low, area_high]), dtype=np.float64)
    stack_two = physics.stack_flow(
        np.where(two_level, effective, 0.0),
        np.where(two_level, np.nan_to_num(rise, nan=0.0), 0.0),
        safe_in,
        safe_out,
        a.discharge_coefficient,
    )
    two_way = physics.discharge_coefficient_two_way(safe_in, safe_out)
    stack_one = np.zeros(n)
    for name, opening in openings.items():
        half_height = math.sqrt(opening.area) / 2.0
        stack_one += physics.stack_flow(free[name], half_height, safe_in, safe_out, two_way)
    stack = np.where(two_level, stack_two, stack_one)

    # --- wind: windward openings in series with leeward ones
    wind_known = np.isfinite(speed) & np.isfinite(direction) & (np.nan_to_num(speed) >= 0.0)
    safe_direction = np.where(wind_known, direction, 0.0)
    area_in = np.zeros(n)
    weighted_cv = np.zeros(n)
    area_out = np.zeros(n)
    for name, opening in openings.items():
        off = _angle_off(safe_direction, opening.facing)
        windward = off < 90.0
        cv = np.where(
            off <= 45.0, a.wind_effectiveness_perpendicular, a.wind_effectiveness_diagonal
        )
        area_in += np.where(windward, free[name], 0.0)
        weighted_cv += np.where(windward, free[name] * cv, 0.0)
        area_out += np.where(windward, 0.0, free[name])
    cv_mean = np.nan_to_num(_divide(weighted_cv, area_in), nan=0.0)
    path = np.asarray(physics.effective_area_series([area_in, area_out]), dtype=np.float64)
    wind = physics.wind_flow(path, np.where(wind_known, speed, 0.0), cv_mean)

    flow = np.asarray(physics.combined_flow(stack, wind), dtype=np.float64)
    unknown = any_open & (released | ~temps_known)
    flow = np.where(any_open, flow, 0.0)
    return AirflowEstimate(
        flow=np.where(unknown, np.nan, flow),
        stack=np.where(unknown, np.nan, np.where(any_open, stack, 0.0)),
        wind=np.where(unknown, np.nan, np.where(any_open, wind, 0.0)),
    )


# --------------------------------------------------------------------------- comfort


def adaptive_limits(
    temp_running_mean: npt.ArrayLike,
    model: AdaptiveModel = "en16798",
    *,
    category: comfort.Category = "II",
    acceptability: Literal[80, 90] = 80,
) -> tuple[FloatArray, FloatArray]:
    """Lower and upper adaptive comfort limits [°C]; NaN outside the model's range.

    ``"en16798"``: EN 16798-1:2019 Annex B, θ_c = 0.33·θ_rm + 18.8 with the
    category's offsets (II: −4/+3 K); ``"ashrae55"``: ASHRAE 55-2020 §5.4,
    t_cmf = 0.31·t_pma + 17.8 ± 3.5 K (80 %) or ± 2.5 K (90 %).

    Examples
    --------
    >>> [round(float(v[0]), 2) for v in adaptive_limits([20.0])]
    [21.4, 28.4]
    """
    running_mean = np.atleast_1d(np.asarray(temp_running_mean, dtype=np.float64))
    if model == "ashrae55":
        lower, upper = comfort.ashrae55_comfort_limits(running_mean, acceptability)
    elif model == "en16798":
        lower, upper = comfort.en16798_comfort_limits(running_mean, category)
    else:
        raise ValueError(f"adaptive model: got {model!r}, expected 'en16798' or 'ashrae55'")
    return np.asarray(lower, dtype=np.float64), np.asarray(upper, dtype=np.float64)


def running_mean_from_daily_means(daily_means: pd.Series, alpha: float = 0.8) -> pd.Series:
    """Running mean outdoor temperature per day, from daily means, never filled.

    Parameters
    ----------
    daily_means : pandas.Series
        Daily mean outdoor temperature [°C], one value per consecutive day in
        order (NaN for a day without a reliable mean).
    alpha : float, default 0.8
        Weight of the previous running mean (EN 16798-1 recommends 0.8).

    Returns
    -------
    pandas.Series
        Running mean for each day [°C], from the days before it:
        θ_rm,n = (1 − α)·θ_ed,n−1 + α·θ_rm,n−1 when yesterday's mean and
        running mean are known, else the seven-day formula of EN 16798-1 when
        the seven days before are all known, else NaN.

    References
    ----------
    .. [1] EN 16798-1:2019, Annex B, running mean outdoor temperature.

    Examples
    --------
    >>> means = pd.Series([20.0] * 7 + [25.0, 25.0])
    >>> running_mean_from_daily_means(means).round(2).tolist()[6:]
    [nan, 20.0, 21.0]
    """
    values = daily_means.to_numpy(dtype=np.float64)
    result = np.full(values.size, np.nan)
    for day in range(1, values.size):
        previous_mean = values[day - 1]
        previous_running = result[day - 1]
        if np.isfinite(previous_mean) and np.isfinite(previous_running):
            result[day] = comfort.running_mean_outdoor_temperature_next(
                float(previous_running), float(previous_mean), alpha
            )
        elif day >= 7 and np.all(np.isfinite(values[day - 7 : day])):
            result[day] = comfort.running_mean_outdoor_temperature_seven_days(
                [float(v) for v in values[day - 7 : day][::-1]]
            )
    return pd.Series(result, index=daily_means.index, name="temp_running_mean")


# --------------------------------------------------------------------------- time


def _local(t: FloatArray, tz: str) -> pd.DatetimeIndex:
    return pd.DatetimeIndex(pd.to_datetime(t, unit="s", utc=True)).tz_convert(tz)


def _local_midnight(t: float, tz: str) -> float:
    zone = ZoneInfo(tz)
    day = dt.datetime.fromtimestamp(t, zone).date()
    return dt.datetime.combine(day, dt.time(0), tzinfo=zone).timestamp()


def _hour_boundaries(first: float, last: float, tz: str) -> FloatArray:
    """Instants where local time reads hh:00:00, from at or before ``first`` to after ``last``."""
    # Every UTC offset in use is a multiple of 15 minutes.
    lo = math.floor(first / 900.0) * 900.0 - 7200.0
    hi = math.ceil(last / 900.0) * 900.0 + 7200.0
    candidates = np.arange(lo, hi + 1.0, 900.0)
    local = _local(candidates, tz)
    keep = np.asarray((local.minute == 0) & (local.second == 0), dtype=bool)
    return np.asarray(candidates[keep], dtype=np.float64)


def _split(
    t0: FloatArray, t1: FloatArray, cuts: FloatArray
) -> tuple[IntArray, FloatArray, FloatArray]:
    """Split intervals [t0, t1) at every cut strictly inside; returns (row, lo, hi) per piece."""
    first = np.searchsorted(cuts, t0, side="right")
    last = np.searchsorted(cuts, t1, side="left")
    count = np.maximum(last - first, 0) + 1
    row = np.repeat(np.arange(t0.size, dtype=np.int64), count)
    offsets = np.cumsum(count) - count
    k = np.arange(int(count.sum()), dtype=np.int64) - np.repeat(offsets, count)
    base = np.repeat(first, count)
    top = cuts.size - 1
    lo = np.where(k == 0, t0[row], cuts[np.clip(base + k - 1, 0, top)])
    hi = np.where(k == count[row] - 1, t1[row], cuts[np.clip(base + k, 0, top)])
    return row, np.asarray(lo, dtype=np.float64), np.asarray(hi, dtype=np.float64)


def _bincount(key: IntArray, weights: npt.ArrayLike, minlength: int) -> FloatArray:
    """Sum of ``weights`` per key, as floats."""
    return np.asarray(np.bincount(key, weights=weights, minlength=minlength), dtype=np.float64)


def _union_seconds(key: IntArray, t0: FloatArray, t1: FloatArray, n_keys: int) -> FloatArray:
    """Length of the union of intervals [t0, t1) per key [s]."""
    total = np.zeros(n_keys)
    keep = t1 > t0
    if not np.any(keep):
        return total
    key, t0, t1 = key[keep], t0[keep], t1[keep]
    order = np.lexsort((t0, key))
    k, lo, hi = key[order], t0[order], t1[order]
    origin = float(lo.min())
    lo = lo - origin
    hi = hi - origin
    span = float(hi.max()) + 1.0
    group_start = np.r_[True, k[1:] != k[:-1]]
    group = np.cumsum(group_start) - 1
    shifted = hi + group * span
    reach = np.maximum.accumulate(shifted) - group * span
    previous = np.r_[-np.inf, reach[:-1]]
    new_run = group_start | (lo > previous)
    starts = np.flatnonzero(new_run)
    run_lo = lo[starts]
    run_hi = np.maximum.reduceat(hi, starts)
    np.add.at(total, k[starts], run_hi - run_lo)
    return total


# --------------------------------------------------------------------------- main


@dataclass(frozen=True)
class _Pieces:
    """Decision time split at local hours: one entry per piece, with its decision row."""

    row: IntArray
    t0: FloatArray
    t1: FloatArray
    zone: IntArray
    hour: IntArray  # index into the hours of the period
    date: IntArray  # index into the dates

    @property
    def seconds(self) -> FloatArray:
        return self.t1 - self.t0

    def subset(self, mask: BoolArray) -> _Pieces:
        return _Pieces(
            self.row[mask], self.t0[mask], self.t1[mask], self.zone[mask], self.hour[mask],
            self.date[mask],
        )  # fmt: skip


@dataclass(frozen=True)
class _Calendar:
    """The local hours and dates from the first history day to the end of the period."""

    hour_lo: FloatArray  # start of each local hour [s]
    hour_hi: FloatArray
    hour_date: IntArray  # date index of each hour
    hour_of_day: IntArray
    day_of_month: IntArray
    dates: npt.NDArray[np.object_]  # "YYYY-MM-DD"
    day_seconds: FloatArray  # length of each date inside the period [s]
    day_seconds_ext: FloatArray  # length of each date inside history + period [s]
    hour_seconds: FloatArray  # length of each hour inside the period [s]

    @property
    def n_dates(self) -> int:
        return int(self.dates.size)

    @property
    def n_hours(self) -> int:
        return int(self.hour_lo.size)

    @property
    def in_period(self) -> BoolArray:
        return np.asarray(self.day_seconds > 0.0, dtype=bool)

    @property
    def months(self) -> npt.NDArray[np.object_]:
        return np.array([date[:7] for date in self.dates], dtype=object)


def _calendar(ext_start: float, start: float, end: float, tz: str) -> _Calendar:
    bounds = _hour_boundaries(ext_start, end, tz)
    lo, hi = bounds[:-1], bounds[1:]
    used = np.flatnonzero((hi > ext_start) & (lo < end))
    lo, hi = lo[used[0] : used[-1] + 1], hi[used[0] : used[-1] + 1]
    local = _local(lo, tz)
    labels = np.asarray(local.strftime("%Y-%m-%d"), dtype=object)
    dates, hour_date = np.unique(labels, return_inverse=True)
    hour_date = np.asarray(hour_date, dtype=np.int64).reshape(-1)
    in_period = np.clip(np.minimum(hi, end) - np.maximum(lo, start), 0.0, None)
    in_ext = np.clip(np.minimum(hi, end) - np.maximum(lo, ext_start), 0.0, None)
    return _Calendar(
        hour_lo=lo,
        hour_hi=hi,
        hour_date=hour_date,
        hour_of_day=np.asarray(local.hour, dtype=np.int64),
        day_of_month=np.asarray(local.day, dtype=np.int64),
        dates=np.asarray(dates, dtype=object),
        day_seconds=_bincount(hour_date, weights=in_period, minlength=dates.size),
        day_seconds_ext=_bincount(hour_date, weights=in_ext, minlength=dates.size),
        hour_seconds=in_period,
    )


@dataclass(frozen=True)
class _Rows:
    """Per-decision arrays, in zone-then-time order."""

    zone: IntArray
    t: FloatArray
    end: FloatArray  # when the decision stops holding [s]
    mode: npt.NDArray[np.object_]
    cause: npt.NDArray[np.object_]
    reason: npt.NDArray[np.object_]
    facts: dict[str, FloatArray]
    is_open: BoolArray
    targets: dict[str, FloatArray]  # commanded fraction per opening name, NaN released/absent
    fraction: FloatArray  # area-weighted commanded opening [0-1], NaN when released
    flow: FloatArray  # [m³/s]
    heat: FloatArray  # [W], positive when heat is removed
    stack_only: BoolArray
    band_low: FloatArray
    band_high: FloatArray

    @property
    def estimated(self) -> BoolArray:
        return np.asarray(self.is_open & np.isfinite(self.flow), dtype=bool)


def compute_figures(
    frame: pd.DataFrame,
    config: SiteConfig,
    start: float,
    end: float,
    *,
    events: Iterable[EventLike] | None = None,
    options: FigureOptions | None = None,
) -> Figures:
    """Compute every figure of the period ``start <= t < end`` from decision records.

    Parameters
    ----------
    frame : DataFrame
        Decisions in the ledger's ``decisions_frame`` layout or from
        :func:`decisions_to_frame` (``fact:<name>`` columns; without them the
        figures that need inputs have no data and are flagged). Rows before
        ``start`` serve as history (see the module notes); zones not in the
        config are left out (and flagged).
    config : SiteConfig
        The site: time zone, zones, openings, comfort bands, tick.
    start, end : float
        The period [s since the epoch, UTC]; ``end`` excluded.
    events : iterable of EventLike, optional
        Recorded events; ``start`` and ``stop`` end the decision before them,
        and every event of the period is listed.
    options : FigureOptions, optional
        Tick, adaptive model, coverage threshold, airflow assumptions.

    Returns
    -------
    Figures
    """
    options = options or FigureOptions()
    if not end > start:
        raise ValueError(f"the period must end after it starts, got start={start} end={end}")
    tick = float(options.tick if options.tick is not None else config.controller.tick)
    max_gap = float(options.max_gap if options.max_gap is not None else 2.0 * tick)
    if not (tick > 0.0 and max_gap > 0.0):
        raise ValueError(f"tick and max_gap must be positive, got {tick} s and {max_gap} s")
    for name in ("coverage_threshold", "daily_mean_coverage"):
        share = getattr(options, name)
        if not 0.0 <= share <= 1.0:
            raise ValueError(f"{name}: got {share}, expected a share from 0 to 1")
    tz = config.site.time_zone
    threshold = options.coverage_threshold
    zones = tuple(config.zones)
    event_list = sorted(events or (), key=lambda event: event.t)
    flags: list[str] = []

    for column in ("t", "zone", "mode", "cause"):
        if column not in frame.columns:
            raise ValueError(f"the decisions table lacks the column {column!r}")
    for name in sorted(set(frame["zone"].astype(str)) - set(zones)):
        flags.append(f"zone {name!r} is in the record but not in the site config: left out")
    if len(frame) and "fact:temp_indoor" not in frame.columns:
        flags.append(
            "the record holds no input values (facts): airflow, cooling, comfort and "
            "coverage have no data; read the decisions with their facts"
        )
    rows = _rows(frame, config, zones, max_gap, event_list, options)

    before_end = rows.t < end
    first = float(rows.t[before_end].min()) if np.any(before_end) else start
    ext_start = min(start, _local_midnight(first, tz))
    calendar = _calendar(ext_start, start, end, tz)
    seg_t0 = np.maximum(rows.t, ext_start)
    seg_t1 = np.minimum(rows.end, end)
    pieces = _pieces(rows, seg_t0, seg_t1, calendar, start)
    period = pieces.subset(pieces.t0 >= start)

    outdoor = _outdoor(rows, pieces, calendar, options)
    states, values = _piece_states(rows, period, outdoor)
    per_zone, per_site = _per_day(period, states, values, len(zones), calendar)
    hourly, hour_arrays = _hourly(rows, period, calendar, zones, config, outdoor, options.category)
    _daily_from_hourly(hour_arrays, calendar, per_zone, per_site)
    moves = _moves(rows, zones, config, calendar, start, end)
    _add_moves(moves, calendar, zones, per_zone, per_site)

    daily = _daily_table(per_zone, per_site, zones, calendar)
    monthly = _derive(_aggregate(daily, "month"), threshold)
    totals = _derive(_aggregate(daily.assign(period="period"), "period"), threshold)
    daily = _derive(daily, threshold)
    coverage = _coverage(rows, period, zones, config, start, end, threshold)
    overheating = _overheating(hourly, zones, tz, threshold)
    flags += _flags(totals, coverage, overheating, outdoor, threshold)
    in_period_events = [e for e in event_list if start <= e.t < end]
    return Figures(
        site=config.site.name,
        time_zone=tz,
        units=config.site.units,
        start=float(start),
        end=float(end),
        tick=tick,
        max_gap=max_gap,
        adaptive_model=options.adaptive_name(),
        coverage_threshold=threshold,
        zones=zones,
        totals=totals,
        monthly=monthly,
        daily=daily,
        hourly=hourly,
        outdoor=outdoor,
        moves=moves,
        overheating=overheating,
        coverage=coverage,
        outages=_outages(rows, seg_t0, seg_t1, zones, start, end, event_list),
        episodes=_episodes(rows, seg_t0, seg_t1, zones, start, end),
        events=pd.DataFrame(
            {
                "t": pd.Series([e.t for e in in_period_events], dtype="float64"),
                "kind": pd.Series([e.kind for e in in_period_events], dtype=object),
                "zone": pd.Series([e.zone for e in in_period_events], dtype=object),
                "who": pd.Series([e.who for e in in_period_events], dtype=object),
                "text": pd.Series([e.text for e in in_period_events], dtype=object),
            }
        ),
        wind=_wind(rows, period, zones),
        flags=tuple(flags),
        assumptions=options.airflow.describe(),
    )


def _rows(
    frame: pd.DataFrame,
    config: SiteConfig,
    zones: tuple[str, ...],
    max_gap: float,
    events: Sequence[EventLike],
    options: FigureOptions,
) -> _Rows:
    """The decisions of known zones in zone-then-time order, with what the figures need."""
    names = frame["zone"].astype(str)
    data = frame[names.isin(zones)]
    codes = np.asarray(
        pd.Categorical(data["zone"].astype(str), categories=list(zones)).codes, dtype=np.int64
    )
    times = data["t"].to_numpy(dtype=np.float64)
    order = np.lexsort((np.arange(len(data)), times, codes))
    data = data.iloc[order].reset_index(drop=True)
    zone = codes[order]
    t = times[order]
    if not np.all(np.isfinite(t)):
        raise ValueError("the decisions table has a time that is not a finite number")
    n = len(data)

    # Each decision holds until the next one of its zone, for at most max_gap,
    # and never past a start or stop of the controller.
    same_next = np.r_[zone[1:] == zone[:-1], False]
    next_t = np.where(same_next, np.r_[t[1:], np.inf], np.inf)
    ends = np.minimum(next_t, t + max_gap)
    cuts = np.array(sorted(e.t for e in events if e.kind in ("start", "stop")), dtype=np.float64)
    if cuts.size:
        index = np.searchsorted(cuts, t, side="right")
        candidate = cuts[np.minimum(index, cuts.size - 1)]
        ends = np.where((index < cuts.size) & (candidate < ends), candidate, ends)

    def column(name: str) -> FloatArray:
        if name in data.columns:
            return data[name].to_numpy(dtype=np.float64)
        return np.full(n, np.nan)

    def text(name: str) -> npt.NDArray[np.object_]:
        if name in data.columns:
            return np.asarray(data[name].astype(str).to_numpy(), dtype=object)
        return np.full(n, "", dtype=object)

    facts = {name: column(f"fact:{name}") for name in FACTS}
    opening_names = sorted({o for z in zones for o in config.zones[z].openings})
    targets = {name: column(f"target:{name}") for name in opening_names}
    is_open = np.zeros(n, dtype=bool)
    fraction = np.full(n, np.nan)
    flow = np.zeros(n)
    stack_only = np.zeros(n, dtype=bool)
    band_low = np.full(n, np.nan)
    band_high = np.full(n, np.nan)
    for code, name in enumerate(zones):
        zone_config = config.zones[name]
        mask = zone == code
        if not np.any(mask):
            continue
        mine = {o: targets[o][mask] for o in zone_config.openings}
        areas = np.array([o.area for o in zone_config.openings.values()], dtype=np.float64)
        matrix = np.column_stack([mine[o] for o in zone_config.openings])
        is_open[mask] = np.any(np.nan_to_num(matrix, nan=0.0) > 0.0, axis=1)
        fraction[mask] = (matrix @ areas) / areas.sum()
        estimate = zone_airflow(
            zone_config.openings,
            mine,
            facts["temp_indoor"][mask],
            facts["temp_outdoor"][mask],
            facts["wind_speed"][mask],
            facts["wind_direction"][mask],
            options.airflow,
        )
        flow[mask] = estimate.flow
        stack_only[mask] = ~(
            np.isfinite(facts["wind_speed"][mask]) & np.isfinite(facts["wind_direction"][mask])
        )
        band = config.rules_for(name).comfort
        band_low[mask] = band.low
        band_high[mask] = band.high
    location = config.site.location
    elevation = 0.0 if location is None else location.elevation
    density = options.airflow.density * physics.standard_atmospheric_pressure(elevation) / 101_325.0
    heat = (
        density
        * options.airflow.specific_heat
        * flow
        * (facts["temp_indoor"] - facts["temp_outdoor"])
    )
    return _Rows(
        zone=zone,
        t=t,
        end=ends,
        mode=text("mode"),
        cause=text("cause"),
        reason=text("reason"),
        facts=facts,
        is_open=is_open,
        targets=targets,
        fraction=fraction,
        flow=flow,
        heat=heat,
        stack_only=stack_only,
        band_low=band_low,
        band_high=band_high,
    )


def _pieces(
    rows: _Rows, seg_t0: FloatArray, seg_t1: FloatArray, calendar: _Calendar, start: float
) -> _Pieces:
    keep = np.flatnonzero(seg_t1 > seg_t0)
    cuts = np.unique(np.r_[calendar.hour_lo, calendar.hour_hi[-1:], start])
    local_row, lo, hi = _split(seg_t0[keep], seg_t1[keep], cuts)
    row = keep[local_row]
    hour = np.asarray(np.searchsorted(calendar.hour_lo, lo, side="right") - 1, dtype=np.int64)
    return _Pieces(
        row=np.asarray(row, dtype=np.int64),
        t0=lo,
        t1=hi,
        zone=rows.zone[row],
        hour=hour,
        date=calendar.hour_date[hour],
    )


def _outdoor(
    rows: _Rows, pieces: _Pieces, calendar: _Calendar, options: FigureOptions
) -> pd.DataFrame:
    """Daily outdoor means, the running mean and the adaptive limits, per local date."""
    temp = rows.facts["temp_outdoor"][pieces.row]
    known = np.isfinite(temp)
    n = calendar.n_dates
    seconds = np.where(known, pieces.seconds, 0.0)
    total = _bincount(pieces.date, weights=seconds, minlength=n)
    weighted = _bincount(pieces.date, weights=seconds * np.nan_to_num(temp), minlength=n)
    covered = _union_seconds(pieces.date[known], pieces.t0[known], pieces.t1[known], n)
    share = _divide(covered, calendar.day_seconds_ext)
    mean = _divide(weighted, total)
    used = np.nan_to_num(share, nan=0.0) >= options.daily_mean_coverage
    days = pd.date_range(str(calendar.dates[0]), str(calendar.dates[-1]), freq="D")
    labels = [str(day) for day in days.strftime("%Y-%m-%d")]
    daily = pd.Series(np.where(used, mean, np.nan), index=[str(d) for d in calendar.dates])
    running = (
        running_mean_from_daily_means(daily.reindex(labels))
        .reindex([str(d) for d in calendar.dates])
        .to_numpy(dtype=np.float64)
    )
    lower, upper = adaptive_limits(
        running, options.adaptive, category=options.category, acceptability=options.acceptability
    )
    return pd.DataFrame(
        {
            "date": pd.Series(calendar.dates.astype(str), dtype=object),
            "day_hours": calendar.day_seconds_ext / _HOUR,
            "temp_outdoor_mean_c": mean,
            "temp_outdoor_share": share,
            "daily_mean_used": used,
            "temp_running_mean_c": running,
            "adaptive_lower_c": lower,
            "adaptive_upper_c": upper,
            "in_period": calendar.in_period,
        }
    )


def _piece_states(
    rows: _Rows, period: _Pieces, outdoor: pd.DataFrame
) -> tuple[dict[str, BoolArray], dict[str, FloatArray]]:
    """Which states each piece of the period is in, and the quantities it carries."""
    r = period.row
    temp = rows.facts["temp_indoor"][r]
    known = np.isfinite(temp)
    safe = np.nan_to_num(temp)
    occupied = rows.facts["occupied"][r] == 1.0
    lower = outdoor["adaptive_lower_c"].to_numpy(dtype=np.float64)[period.date]
    upper = outdoor["adaptive_upper_c"].to_numpy(dtype=np.float64)[period.date]
    band_known = np.isfinite(lower) & np.isfinite(upper)
    comfort_known = occupied & known
    adaptive_known = comfort_known & band_known
    low, high = rows.band_low[r], rows.band_high[r]
    estimated = rows.estimated[r]
    mode, cause = rows.mode[r], rows.cause[r]
    states: dict[str, BoolArray] = {
        "online_hours": np.ones(r.size, dtype=bool),
        "open_hours": rows.is_open[r],
    }
    for name in MODES:
        states[f"mode_{name}_hours"] = np.asarray(mode == name, dtype=bool)
    for name in CAUSES:
        states[f"cause_{name}_hours"] = np.asarray(cause == name, dtype=bool)
    states.update(
        {
            "airflow_estimated_hours": estimated,
            "airflow_stack_only_hours": estimated & rows.stack_only[r],
            "occupied_hours": occupied,
            "occupancy_unknown_hours": np.isnan(rows.facts["occupied"][r]),
            "comfort_known_hours": comfort_known,
            "comfort_fixed_hours": comfort_known & (safe >= low) & (safe <= high),
            "comfort_fixed_below_hours": comfort_known & (safe < low),
            "comfort_fixed_above_hours": comfort_known & (safe > high),
            "adaptive_known_hours": adaptive_known,
            "comfort_adaptive_hours": adaptive_known
            & (safe >= np.nan_to_num(lower))
            & (safe <= np.nan_to_num(upper)),
            "comfort_adaptive_below_hours": adaptive_known & (safe < np.nan_to_num(lower)),
            "comfort_adaptive_above_hours": adaptive_known & (safe > np.nan_to_num(upper)),
        }
    )
    seconds = period.seconds
    heat = np.where(estimated, np.nan_to_num(rows.heat[r]), 0.0)
    values = {
        "air_volume_m3": np.where(estimated, np.nan_to_num(rows.flow[r]), 0.0) * seconds,
        "cooling_kwh": np.clip(heat, 0.0, None) * seconds / _JOULES_PER_KWH,
        "heat_gain_kwh": np.clip(-heat, 0.0, None) * seconds / _JOULES_PER_KWH,
    }
    return states, values


def _per_day(
    period: _Pieces,
    states: Mapping[str, BoolArray],
    values: Mapping[str, FloatArray],
    n_zones: int,
    calendar: _Calendar,
) -> tuple[dict[str, FloatArray], dict[str, FloatArray]]:
    """Hours per zone and date (sums) and for the site (unions)."""
    n = calendar.n_dates
    key = period.zone * n + period.date
    seconds = period.seconds
    per_zone: dict[str, FloatArray] = {}
    per_site: dict[str, FloatArray] = {}

    def union(mask: BoolArray) -> FloatArray:
        return _union_seconds(period.date[mask], period.t0[mask], period.t1[mask], n) / _HOUR

    for name, state in states.items():
        weights = np.where(state, seconds, 0.0)
        per_zone[name] = (
            _bincount(key, weights=weights, minlength=n_zones * n).reshape(n_zones, n) / _HOUR
        )
        per_site[name] = union(state)
    # The site is comfortable (or known) while every occupied zone is.
    occupied = states["occupied_hours"]
    for name in (
        "comfort_known_hours",
        "comfort_fixed_hours",
        "adaptive_known_hours",
        "comfort_adaptive_hours",
    ):
        spoiled = union(occupied & ~states[name])
        per_site[name] = np.clip(per_site["occupied_hours"] - spoiled, 0.0, None)
    for name, value in values.items():
        per_zone[name] = _bincount(key, weights=value, minlength=n_zones * n).reshape(n_zones, n)
        per_site[name] = per_zone[name].sum(axis=0)
    return per_zone, per_site


@dataclass(frozen=True)
class _HourArrays:
    occupied: BoolArray  # (zones, hours) TM52 occupied hour
    unknown: BoolArray  # occupancy not recorded
    assessed: BoolArray
    delta: FloatArray
    volume: FloatArray
    site_occupied: BoolArray  # (hours,)
    site_unknown: BoolArray
    site_assessed: BoolArray
    site_exceeded: BoolArray
    site_volume: FloatArray


def _hourly(
    rows: _Rows,
    period: _Pieces,
    calendar: _Calendar,
    zones: tuple[str, ...],
    config: SiteConfig,
    outdoor: pd.DataFrame,
    category: comfort.Category,
) -> tuple[pd.DataFrame, _HourArrays]:
    """Hourly means per zone and for the site, with the TM52 values of each hour."""
    n_z, n_h = len(zones), calendar.n_hours
    key = period.zone * n_h + period.hour
    r = period.row
    seconds = period.seconds

    def zone_sum(weights: FloatArray) -> FloatArray:
        return _bincount(key, weights=weights, minlength=n_z * n_h).reshape(n_z, n_h)

    def site_sum(weights: FloatArray) -> FloatArray:
        return _bincount(period.hour, weights=weights, minlength=n_h)

    def site_union(mask: BoolArray) -> FloatArray:
        return _union_seconds(period.hour[mask], period.t0[mask], period.t1[mask], n_h) / _HOUR

    fraction = rows.fraction[r]
    fraction_weight = np.where(np.isfinite(fraction), seconds, 0.0)
    fraction_value = fraction_weight * np.nan_to_num(fraction)
    area = np.array([sum(o.area for o in config.zones[z].openings.values()) for z in zones])
    piece_area = area[period.zone]
    temp_in = rows.facts["temp_indoor"][r]
    temp_out = rows.facts["temp_outdoor"][r]
    in_weight = np.where(np.isfinite(temp_in), seconds, 0.0)
    out_weight = np.where(np.isfinite(temp_out), seconds, 0.0)
    occupied = rows.facts["occupied"][r] == 1.0
    occupancy_unknown = np.isnan(rows.facts["occupied"][r])
    volume = zone_sum(np.where(rows.estimated[r], np.nan_to_num(rows.flow[r]), 0.0) * seconds)
    hour_length = np.where(calendar.hour_seconds > 0.0, calendar.hour_seconds, np.nan)

    zone_values = {
        "online_hours": zone_sum(seconds) / _HOUR,
        "open_hours": zone_sum(np.where(rows.is_open[r], seconds, 0.0)) / _HOUR,
        "occupied_hours": zone_sum(np.where(occupied, seconds, 0.0)) / _HOUR,
        "opening_fraction": _divide(zone_sum(fraction_value), zone_sum(fraction_weight)),
        "temp_indoor_c": _divide(zone_sum(in_weight * np.nan_to_num(temp_in)), zone_sum(in_weight)),
        "temp_outdoor_c": _divide(
            zone_sum(out_weight * np.nan_to_num(temp_out)), zone_sum(out_weight)
        ),
        "air_volume_m3": volume,
        "airflow_mean_m3s": volume / hour_length,
    }
    temp_known_hours = zone_sum(in_weight) / _HOUR
    unknown_hours = zone_sum(np.where(occupancy_unknown, seconds, 0.0)) / _HOUR
    site_volume = volume.sum(axis=0)
    site_values = {
        "online_hours": site_union(np.ones(r.size, dtype=bool)),
        "open_hours": site_union(rows.is_open[r]),
        "occupied_hours": site_union(occupied),
        "opening_fraction": _divide(
            site_sum(fraction_value * piece_area), site_sum(fraction_weight * piece_area)
        ),
        "temp_indoor_c": np.full(n_h, np.nan),
        "temp_outdoor_c": _divide(
            site_sum(out_weight * np.nan_to_num(temp_out)), site_sum(out_weight)
        ),
        "air_volume_m3": site_volume,
        "airflow_mean_m3s": site_volume / hour_length,
    }

    # TM52: an hour is occupied when occupied for half of it or more, assessed when
    # the indoor temperature is known for half of it and the running mean is known.
    running = outdoor["temp_running_mean_c"].to_numpy(dtype=np.float64)[calendar.hour_date]
    running_known = np.isfinite(running)
    temp_max = np.where(
        running_known, comfort.tm52_max_temperature(np.nan_to_num(running), category), np.nan
    )
    tm52_occupied = zone_values["occupied_hours"] >= 0.5
    tm52_unknown = ~tm52_occupied & (unknown_hours >= 0.5)
    assessed = tm52_occupied & (temp_known_hours >= 0.5) & running_known[None, :]
    delta = np.where(
        assessed,
        comfort.tm52_delta_temperature(
            np.where(assessed, np.nan_to_num(zone_values["temp_indoor_c"]), 0.0),
            np.broadcast_to(np.nan_to_num(temp_max), (n_z, n_h)),
        ),
        np.nan,
    )
    site_occupied = np.any(tm52_occupied, axis=0)
    site_unknown = ~site_occupied & np.any(tm52_unknown, axis=0)
    site_assessed = site_occupied & np.all(assessed | ~tm52_occupied, axis=0)
    site_delta_raw = np.max(np.where(assessed, delta, -np.inf), axis=0, initial=-np.inf)
    site_delta = np.where(np.isfinite(site_delta_raw), site_delta_raw, np.nan)
    exceeded = assessed & (np.nan_to_num(delta) >= 1.0)
    site_exceeded = np.any(exceeded, axis=0)

    in_period = np.flatnonzero(calendar.hour_seconds > 0.0)
    local_dates = calendar.dates[calendar.hour_date[in_period]].astype(str)
    parts: list[pd.DataFrame] = []
    for code, name in ((-1, SITE), *enumerate(zones)):

        def pick(
            array: FloatArray | BoolArray, site_array: FloatArray | BoolArray, code: int = code
        ) -> Any:
            return (site_array if code < 0 else array[code])[in_period]

        parts.append(
            pd.DataFrame(
                {
                    "zone": name,
                    "hour_start": calendar.hour_lo[in_period],
                    "date": local_dates,
                    "hour": calendar.hour_of_day[in_period],
                    "day": calendar.day_of_month[in_period],
                    **{
                        column: pick(zone_values[column], site_values[column])
                        for column in zone_values
                    },
                    "temp_running_mean_c": running[in_period],
                    "temp_max_c": temp_max[in_period],
                    "delta_t_k": pick(delta, site_delta),
                    "tm52_occupied": pick(tm52_occupied, site_occupied),
                    "tm52_unknown": pick(tm52_unknown, site_unknown),
                    "tm52_assessed": pick(assessed, site_assessed),
                    "tm52_exceeded": pick(exceeded, site_exceeded),
                }
            )
        )
    table = pd.concat(parts, ignore_index=True)
    arrays = _HourArrays(
        occupied=tm52_occupied,
        unknown=tm52_unknown,
        assessed=assessed,
        delta=delta,
        volume=volume,
        site_occupied=site_occupied,
        site_unknown=site_unknown,
        site_assessed=site_assessed,
        site_exceeded=site_exceeded,
        site_volume=site_volume,
    )
    return table, arrays


def _daily_from_hourly(
    arrays: _HourArrays,
    calendar: _Calendar,
    per_zone: dict[str, FloatArray],
    per_site: dict[str, FloatArray],
) -> None:
    """Add the TM52 daily figures and the hourly peak airflow to the day tables."""
    n = calendar.n_dates
    day = calendar.hour_date

    def by_day(hours: FloatArray | BoolArray) -> FloatArray:
        return _bincount(day, weights=np.asarray(hours, dtype=np.float64), minlength=n)

    n_z = arrays.occupied.shape[0]
    exceeded = arrays.assessed & (np.nan_to_num(arrays.delta) >= 1.0)
    weighted = np.where(arrays.assessed, np.maximum(np.nan_to_num(arrays.delta), 0.0), 0.0)
    per_zone["tm52_occupied_hours"] = np.array(
        [by_day(arrays.occupied[z]) for z in range(n_z)]
    ).reshape(n_z, n)
    per_zone["tm52_assessed_hours"] = np.array(
        [by_day(arrays.assessed[z]) for z in range(n_z)]
    ).reshape(n_z, n)
    per_zone["overheating_hours"] = np.array([by_day(exceeded[z]) for z in range(n_z)]).reshape(
        n_z, n
    )
    per_zone["weighted_exceedance_max_kh"] = np.array(
        [by_day(weighted[z]) for z in range(n_z)]
    ).reshape(n_z, n)
    per_zone["tm52_unknown_hours"] = np.array(
        [by_day(arrays.unknown[z]) for z in range(n_z)]
    ).reshape(n_z, n)
    per_site["tm52_occupied_hours"] = by_day(arrays.site_occupied)
    per_site["tm52_unknown_hours"] = by_day(arrays.site_unknown)
    per_site["tm52_assessed_hours"] = by_day(arrays.site_assessed)
    per_site["overheating_hours"] = by_day(arrays.site_exceeded)
    per_site["weighted_exceedance_max_kh"] = np.full(n, np.nan)

    length = np.where(calendar.hour_seconds > 0.0, calendar.hour_seconds, np.nan)
    peak_zone = np.zeros((n_z, n))
    for z in range(n_z):
        np.fmax.at(peak_zone[z], day, np.nan_to_num(arrays.volume[z] / length))
    peak_site = np.zeros(n)
    np.fmax.at(peak_site, day, np.nan_to_num(arrays.site_volume / length))
    per_zone["airflow_peak_m3s"] = peak_zone
    per_site["airflow_peak_m3s"] = peak_site


def _moves(
    rows: _Rows,
    zones: tuple[str, ...],
    config: SiteConfig,
    calendar: _Calendar,
    start: float,
    end: float,
) -> pd.DataFrame:
    """Actuator moves and travel per opening and local date of the period.

    A move is a change of the commanded target from the last commanded one;
    released spells (NaN) are skipped, so taking an opening back from the fire
    system at the position it was released from is no move.
    """
    period_dates = np.flatnonzero(calendar.in_period)
    hour = np.clip(np.searchsorted(calendar.hour_lo, rows.t, side="right") - 1, 0, None)
    row_date = calendar.hour_date[hour]
    parts: list[pd.DataFrame] = []
    for code, name in enumerate(zones):
        index = np.flatnonzero(rows.zone == code)
        inside = (rows.t[index] >= start) & (rows.t[index] < end)
        dates = row_date[index]
        for opening in config.zones[name].openings:
            target = rows.targets[opening][index]
            previous = pd.Series(target).ffill().shift(1).to_numpy(dtype=np.float64)
            moved = inside & np.isfinite(target) & np.isfinite(previous)
            moved &= np.nan_to_num(target) != np.nan_to_num(previous)
            travel = np.where(moved, np.abs(np.nan_to_num(target) - np.nan_to_num(previous)), 0.0)
            count = _bincount(dates, weights=moved.astype(np.float64), minlength=calendar.n_dates)
            total = _bincount(dates, weights=travel, minlength=calendar.n_dates)
            parts.append(
                pd.DataFrame(
                    {
                        "zone": name,
                        "opening": opening,
                        "date": calendar.dates[period_dates].astype(str),
                        "month": calendar.months[period_dates].astype(str),
                        "moves": count[period_dates].astype(np.int64),
                        "travel": total[period_dates],
                    }
                )
            )
    return pd.concat(parts, ignore_index=True)


def _add_moves(
    moves: pd.DataFrame,
    calendar: _Calendar,
    zones: tuple[str, ...],
    per_zone: dict[str, FloatArray],
    per_site: dict[str, FloatArray],
) -> None:
    n_z, n = len(zones), calendar.n_dates
    zone_index = np.array([zones.index(str(z)) for z in moves["zone"]], dtype=np.int64)
    date_index = np.searchsorted(calendar.dates.astype(str), moves["date"].to_numpy(dtype=str))
    for column in ("moves", "travel"):
        array = np.zeros((n_z, n))
        np.add.at(array, (zone_index, date_index), moves[column].to_numpy(dtype=np.float64))
        per_zone[column] = array
        per_site[column] = array.sum(axis=0)


_RAW_SUMS: Final = ("hours", *(name for name in _SUMS if name != "offline_hours"))


def _daily_table(
    per_zone: Mapping[str, FloatArray],
    per_site: Mapping[str, FloatArray],
    zones: tuple[str, ...],
    calendar: _Calendar,
) -> pd.DataFrame:
    days = np.flatnonzero(calendar.in_period)
    parts: list[pd.DataFrame] = []
    for code, name in ((-1, SITE), *enumerate(zones)):
        columns: dict[str, Any] = {
            "zone": name,
            "date": calendar.dates[days].astype(str),
            "month": calendar.months[days].astype(str),
            "hours": calendar.day_seconds[days] / _HOUR,
        }
        for column in (*_RAW_SUMS, *_MAXES):
            if column == "hours":
                continue
            source = per_site[column] if code < 0 else per_zone[column][code]
            columns[column] = np.asarray(source, dtype=np.float64)[days]
        parts.append(pd.DataFrame(columns))
    return pd.concat(parts, ignore_index=True)


def _aggregate(daily: pd.DataFrame, key: str) -> pd.DataFrame:
    groups = daily.groupby(["zone", key], sort=False)
    sums = groups[list(_RAW_SUMS)].sum()
    maxes = groups[list(_MAXES)].max()
    return pd.concat([sums, maxes], axis=1).reset_index()


def _share(numerator: pd.Series, denominator: pd.Series) -> FloatArray:
    return _divide(numerator.to_numpy(dtype=np.float64), denominator.to_numpy(dtype=np.float64))


def _derive(table: pd.DataFrame, threshold: float) -> pd.DataFrame:
    """Add the offline hours, means, unit conversions, shares and flags; order the columns."""
    out = table.copy()
    out["offline_hours"] = (out["hours"] - out["online_hours"]).clip(lower=0.0)
    out["record_share"] = _share(out["online_hours"], out["hours"])
    out["airflow_mean_m3s"] = _share(out["air_volume_m3"], out["airflow_estimated_hours"] * _HOUR)
    out["airflow_mean_cfm"] = physics.cubic_metres_per_second_to_cfm(
        out["airflow_mean_m3s"].to_numpy(dtype=np.float64)
    )
    out["airflow_peak_cfm"] = physics.cubic_metres_per_second_to_cfm(
        out["airflow_peak_m3s"].to_numpy(dtype=np.float64)
    )
    out["airflow_known_share"] = _share(out["airflow_estimated_hours"], out["open_hours"])
    out["cooling_ton_hours"] = out["cooling_kwh"] / _KWH_PER_TON_HOUR
    # Hours whose occupancy is not recorded may have been occupied: they count as unknown.
    base = out["occupied_hours"] + out["occupancy_unknown_hours"]
    out["comfort_known_share"] = _share(out["comfort_known_hours"], base)
    out["adaptive_known_share"] = _share(out["adaptive_known_hours"], base)
    out["tm52_known_share"] = _share(
        out["tm52_assessed_hours"], out["tm52_occupied_hours"] + out["tm52_unknown_hours"]
    )
    for share, flag in (
        ("record_share", "record_flagged"),
        ("airflow_known_share", "airflow_flagged"),
        ("comfort_known_share", "comfort_flagged"),
        ("adaptive_known_share", "adaptive_flagged"),
        ("tm52_known_share", "tm52_flagged"),
    ):
        out[flag] = np.nan_to_num(out[share].to_numpy(dtype=np.float64), nan=1.0) < threshold
    out["moves"] = out["moves"].round().astype(np.int64)
    keys = [c for c in ("zone", "date", "month", "period") if c in out.columns]
    return out[[*keys, *COLUMNS]]


_INPUTS: Final = (
    ("temp_indoor", "zone", "airflow, cooling, comfort, overheating"),
    ("occupied", "zone", "comfort, overheating (which hours count)"),
    ("co2", "zone", "not used by the figures (decisions only)"),
    ("heating", "zone", "not used by the figures (decisions only)"),
    ("temp_outdoor", "site", "airflow, cooling, running mean, adaptive comfort"),
    ("dew_point_outdoor", "site", "not used by the figures (decisions only)"),
    ("wind_speed", "site", "airflow (wind part), wind rose"),
    ("wind_direction", "site", "airflow (wind part), wind rose"),
    ("rain", "site", "not used by the figures (decisions only)"),
)


def _configured(config: SiteConfig, zone: str | None, name: str) -> bool:
    if name == "co2":
        return zone is not None and config.zones[zone].co2 is not None
    if name == "heating":
        return zone is not None and config.zones[zone].heating is not None
    if name == "dew_point_outdoor":
        return config.outdoor.dew_point is not None or config.outdoor.humidity is not None
    if name == "wind_direction":
        return config.outdoor.wind_direction is not None
    return True


def _coverage(
    rows: _Rows,
    period: _Pieces,
    zones: tuple[str, ...],
    config: SiteConfig,
    start: float,
    end: float,
    threshold: float,
) -> pd.DataFrame:
    """Share of the time (and of the decisions) in which each input was known."""
    in_rows = (rows.t >= start) & (rows.t < end)
    period_hours = (end - start) / _HOUR
    records: list[dict[str, Any]] = []

    def add(
        zone: str,
        name: str,
        configured: bool,
        hours: float,
        known_hours: float,
        decisions: int,
        decisions_known: int,
        used_for: str,
    ) -> None:
        share = known_hours / hours if hours > 0.0 else math.nan
        share_decisions = decisions_known / decisions if decisions else math.nan
        records.append(
            {
                "zone": zone,
                "input": name,
                "configured": configured,
                "hours": hours,
                "known_hours": known_hours if configured else math.nan,
                "share_of_time": share if configured else math.nan,
                "decisions": decisions,
                "decisions_known": decisions_known if configured else 0,
                "share_of_decisions": share_decisions if configured else math.nan,
                "flagged": bool(configured and not (share >= threshold)),
                "used_for": used_for,
            }
        )

    site_online = _union_seconds(
        np.zeros(period.row.size, dtype=np.int64), period.t0, period.t1, 1
    )[0]
    add(
        SITE,
        "decision record",
        True,
        period_hours,
        site_online / _HOUR,
        int(in_rows.sum()),
        int(in_rows.sum()),
        "every figure",
    )
    for name, level, used_for in _INPUTS:
        if level != "site":
            continue
        known_piece = np.isfinite(rows.facts[name][period.row])
        known = _union_seconds(
            np.zeros(int(known_piece.sum()), dtype=np.int64),
            period.t0[known_piece],
            period.t1[known_piece],
            1,
        )[0]
        known_rows = in_rows & np.isfinite(rows.facts[name])
        add(
            SITE, name, _configured(config, None, name), site_online / _HOUR, known / _HOUR,
            int(in_rows.sum()), int(known_rows.sum()), used_for,
        )  # fmt: skip
    for code, zone in enumerate(zones):
        mine = period.zone == code
        online = float(period.seconds[mine].sum())
        zone_rows = in_rows & (rows.zone == code)
        add(zone, "decision record", True, period_hours, online / _HOUR, int(zone_rows.sum()), int(zone_rows.sum()), "every figure")  # fmt: skip
        for name, level, used_for in _INPUTS:
            if level != "zone":
                continue
            known_piece = mine & np.isfinite(rows.facts[name][period.row])
            known_rows = zone_rows & np.isfinite(rows.facts[name])
            add(
                zone, name, _configured(config, zone, name), online / _HOUR,
                float(period.seconds[known_piece].sum()) / _HOUR, int(zone_rows.sum()),
                int(known_rows.sum()), used_for,
            )  # fmt: skip
    return pd.DataFrame.from_records(records)


_ASSESSMENT_FIELDS: Final = tuple(item.name for item in fields(comfort.OverheatingAssessment))


def _overheating(
    hourly: pd.DataFrame, zones: tuple[str, ...], tz: str, threshold: float
) -> pd.DataFrame:
    """The TM52 assessment per zone over the assessed occupied hours of the period."""
    records: list[dict[str, Any]] = []
    for name in zones:
        part = hourly[hourly["zone"] == name]
        occupied = int(part["tm52_occupied"].sum())
        unknown = int(part["tm52_unknown"].sum())
        chosen = part[part["tm52_assessed"].to_numpy(dtype=bool)]
        share = len(chosen) / (occupied + unknown) if occupied + unknown else math.nan
        record: dict[str, Any] = {
            "zone": name,
            "occupied_whole_hours": occupied,
            "occupancy_unknown_hours": unknown,
            "assessed_share": share,
            "flagged": bool(occupied + unknown and share < threshold),
            "note": "",
        }
        assessment: comfort.OverheatingAssessment | None = None
        if not occupied and not unknown:
            record["note"] = "no occupied hour in the period"
        elif not occupied:
            record["note"] = "occupancy not recorded"
        elif chosen.empty:
            record["note"] = "no occupied hour with indoor temperature and running mean known"
        else:
            index = pd.DatetimeIndex(
                pd.to_datetime(chosen["hour_start"].to_numpy(dtype=np.float64), unit="s", utc=True)
            ).tz_convert(tz)
            try:
                assessment = comfort.tm52_overheating(
                    pd.Series(chosen["temp_indoor_c"].to_numpy(dtype=np.float64), index=index),
                    pd.Series(
                        chosen["temp_running_mean_c"].to_numpy(dtype=np.float64), index=index
                    ),
                    pd.Series([True] * len(chosen), index=index, dtype=bool),
                )
            except ValueError as exc:
                record["note"] = f"TM52 not assessed: {exc}"
        for item in _ASSESSMENT_FIELDS:
            record[item] = getattr(assessment, item) if assessment is not None else None
        records.append(record)
    return pd.DataFrame.from_records(records)


def _percent(share: float) -> str:
    return f"{100.0 * share:.1f} %"


def _flags(
    totals: pd.DataFrame,
    coverage: pd.DataFrame,
    overheating: pd.DataFrame,
    outdoor: pd.DataFrame,
    threshold: float,
) -> list[str]:
    """Every figure with poor coverage, in words."""
    limit = _percent(threshold)
    flags: list[str] = []
    missing = outdoor[outdoor["in_period"] & ~np.isfinite(outdoor["temp_running_mean_c"])]
    if len(missing):
        flags.append(
            f"running mean of outdoor temperature unknown on {len(missing)} day(s) "
            f"({', '.join(missing['date'].astype(str).head(5))}{'...' if len(missing) > 5 else ''}): "
            "it needs the daily means of the days before (seven for a fresh start); "
            "adaptive comfort and TM52 leave those days out"
        )
    for item in coverage[coverage["flagged"]].to_dict(orient="records"):
        where = "site" if item["zone"] == SITE else f"zone {item['zone']}"
        flags.append(
            f"{where}: {item['input']} known for {_percent(float(item['share_of_time']))} of "
            f"the time (below {limit}); affects {item['used_for']}"
        )
    checks = (
        ("record_flagged", "record_share", "decisions cover"),
        ("airflow_flagged", "airflow_known_share", "airflow and cooling estimated for"),
        ("comfort_flagged", "comfort_known_share", "fixed-band comfort known for"),
        ("adaptive_flagged", "adaptive_known_share", "adaptive comfort known for"),
        ("tm52_flagged", "tm52_known_share", "TM52 hours assessed for"),
    )
    for row in totals.to_dict(orient="records"):
        where = "site" if row["zone"] == SITE else f"zone {row['zone']}"
        for flag, share, words in checks:
            if row[flag]:
                base = "of the period" if flag == "record_flagged" else "of the relevant hours"
                flags.append(
                    f"{where}: {words} {_percent(float(row[share]))} {base} (below {limit})"
                )
    for row in overheating.to_dict(orient="records"):
        if row["note"] and not row["flagged"]:
            flags.append(f"zone {row['zone']}: {row['note']}")
    return flags


def _covered_intervals(lo: FloatArray, hi: FloatArray) -> list[tuple[float, float]]:
    keep = hi > lo
    lo, hi = lo[keep], hi[keep]
    order = np.argsort(lo, kind="stable")
    merged: list[tuple[float, float]] = []
    for a, b in zip(lo[order].tolist(), hi[order].tolist(), strict=True):
        if merged and a <= merged[-1][1]:
            merged[-1] = (merged[-1][0], max(merged[-1][1], b))
        else:
            merged.append((a, b))
    return merged


def _outages(
    rows: _Rows,
    seg_t0: FloatArray,
    seg_t1: FloatArray,
    zones: tuple[str, ...],
    start: float,
    end: float,
    events: Sequence[EventLike],
) -> pd.DataFrame:
    """Spells without decisions, for the site (no zone decided) and per zone."""
    lo = np.maximum(seg_t0, start)
    hi = np.minimum(seg_t1, end)
    stops = np.array(sorted(e.t for e in events if e.kind == "stop"), dtype=np.float64)
    records: list[dict[str, Any]] = []
    for code, name in ((-1, SITE), *enumerate(zones)):
        mask = np.ones(lo.size, dtype=bool) if code < 0 else rows.zone == code
        covered = _covered_intervals(lo[mask], hi[mask])
        edges = [start, *(x for pair in covered for x in pair), end]
        for gap_start, gap_end in zip(edges[0::2], edges[1::2], strict=True):
            if gap_end - gap_start <= 0.5:
                continue
            stopped = bool(np.any((stops >= gap_start - 1.0) & (stops <= gap_end)))
            records.append(
                {
                    "zone": name,
                    "start": gap_start,
                    "end": gap_end,
                    "hours": (gap_end - gap_start) / _HOUR,
                    "note": "controller stopped" if stopped else "no decisions recorded",
                }
            )
    columns = ["zone", "start", "end", "hours", "note"]
    return pd.DataFrame.from_records(records, columns=columns)


def _episode_kind(mode: str, cause: str) -> str | None:
    if mode in (Mode.RELEASED.value, Mode.FIRE_POSITION.value):
        return "fire alarm"
    if mode == Mode.OVERRIDE.value or cause == "operator":
        return "operator override"
    if cause == "actuator":
        return "actuator fault"
    if mode == Mode.FAULT.value or cause == "fault":
        return "input fault"
    return None


def _episodes(
    rows: _Rows,
    seg_t0: FloatArray,
    seg_t1: FloatArray,
    zones: tuple[str, ...],
    start: float,
    end: float,
) -> pd.DataFrame:
    """Fire alarms, operator overrides and faults of the period, with their reasons."""
    lo = np.maximum(seg_t0, start)
    hi = np.minimum(seg_t1, end)
    records: list[dict[str, Any]] = []
    for code, name in enumerate(zones):
        current: dict[str, Any] | None = None
        reasons: set[str] = set()
        last_end = -math.inf
        for i in np.flatnonzero((rows.zone == code) & (rows.t >= start) & (rows.t < end)).tolist():
            kind = _episode_kind(str(rows.mode[i]), str(rows.cause[i]))
            continues = (
                current is not None and kind == current["kind"] and rows.t[i] <= last_end + 1e-6
            )
            if current is not None and not continues:
                current["reasons"] = len(reasons)
                records.append(current)
                current = None
            if kind is not None:
                if current is None:
                    current = {
                        "zone": name,
                        "kind": kind,
                        "start": float(rows.t[i]),
                        "end": float(hi[i]),
                        "hours": 0.0,
                        "reason": str(rows.reason[i]),
                    }
                    reasons = set()
                current["end"] = max(float(current["end"]), float(hi[i]))
                current["hours"] = float(current["hours"]) + max(float(hi[i] - lo[i]), 0.0) / _HOUR
                reasons.add(str(rows.reason[i]))
            last_end = float(rows.end[i])
        if current is not None:
            current["reasons"] = len(reasons)
            records.append(current)
    columns = ["zone", "kind", "start", "end", "hours", "reason", "reasons"]
    table = pd.DataFrame.from_records(records, columns=columns)
    return table.sort_values(["start", "zone"], kind="stable").reset_index(drop=True)


def _class_top(speed_class: int, edges: FloatArray) -> float:
    if speed_class < 0:
        return math.nan
    return float(edges[speed_class + 1]) if speed_class + 1 < edges.size else math.inf


def _wind(rows: _Rows, period: _Pieces, zones: tuple[str, ...]) -> pd.DataFrame:
    """Hours decided by wind, by compass sector and speed class of the wind."""
    chosen = np.asarray(rows.cause[period.row] == "wind", dtype=bool)
    part = period.subset(chosen)
    direction = rows.facts["wind_direction"][part.row]
    speed = rows.facts["wind_speed"][part.row]
    known = np.isfinite(direction)
    sector = np.where(
        known, np.floor(((np.nan_to_num(direction) + 11.25) % 360.0) / 22.5), -1.0
    ).astype(np.int64)
    edges = np.asarray(WIND_SPEED_EDGES)
    speed_class = np.where(
        np.isfinite(speed),
        np.searchsorted(edges, np.nan_to_num(speed), side="right") - 1,
        -1,
    ).astype(np.int64)
    n_classes = edges.size + 1  # class -1 (unknown speed) first
    n_keys = 17 * n_classes
    key = (sector + 1) * n_classes + (speed_class + 1)
    records: list[dict[str, Any]] = []
    for code, name in ((-1, SITE), *enumerate(zones)):
        if code < 0:
            seconds = _union_seconds(key, part.t0, part.t1, n_keys)
        else:
            mine = part.zone == code
            seconds = _bincount(key[mine], weights=part.seconds[mine], minlength=n_keys)
        for value in np.flatnonzero(seconds > 0.0).tolist():
            s, c = divmod(value, n_classes)
            s, c = s - 1, c - 1
            records.append(
                {
                    "zone": name,
                    "sector": s,
                    "direction": COMPASS[s] if s >= 0 else "unknown",
                    "speed_class": c,
                    "speed_low": float(edges[c]) if c >= 0 else math.nan,
                    "speed_high": _class_top(c, edges),
                    "hours": float(seconds[value]) / _HOUR,
                }
            )
    columns = ["zone", "sector", "direction", "speed_class", "speed_low", "speed_high", "hours"]
    return pd.DataFrame.from_records(records, columns=columns)
