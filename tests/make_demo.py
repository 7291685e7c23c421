"""Regenerate demo.db.sql, the invented demo plant, through the real store API.

Run from the repository top:  python tests/make_demo.py

The plant, its machines, its people (initials only) and every number are made up. The story
is simulated with a seeded random generator, so the output is the same byte for byte on every
run: tests/store/test_demo.py checks that demo.db.sql still equals what this script writes.

How the numbers are made:
- Each unit runs to its own timetable; the oil temperature follows the hall temperature
  (season, weather, time of day) when the unit stands and warms towards its running
  temperature when it runs. Press PR-3 stands in an unheated hall: cold Monday mornings.
- Each filter element loads along clean + (limit - clean) * g(age / life), with
  g(u) = c * u + (1 - c) * (exp(k u) - 1) / (exp(k) - 1): slow at first, then faster.
  Age is operating time. The gauge shows that reference ΔP turned back into the ΔP at the
  reading's temperature (and flow, where logged) with store.physics.normalise, plus a little noise,
  rounded to the gauge's resolution.
- An element is changed when a reading reaches its change limit (earlier on filters read only
  weekly), or at the summer shutdown (planned, right-censored lives).
"""

from __future__ import annotations

import math
import random
import sys
import tempfile
import uuid
from collections.abc import Iterator
from contextlib import contextmanager
from dataclasses import dataclass, field
from datetime import UTC, date, datetime, timedelta
from pathlib import Path
from zoneinfo import ZoneInfo

ROOT = Path(__file__).resolve().parent.parent
# Run as a script, Python puts tests/ first on the path, where tests/store would stand in for
# the package: the repository's top goes before it, whatever else is installed.
sys.path.insert(0, str(ROOT))


from store import record  # noqa: E402
from store.base.session import fixed_clock  # noqa: E402
from store.base.timeutil import format_utc  # noqa: E402
from store.db.book import Book, open_book  # noqa: E402
from store.db.schema import SCHEMA_VERSION  # noqa: E402
from store.health.conditions import FilterContext, contexts  # noqa: E402
from store.ledger import register  # noqa: E402
from store.ledger.entries import (  # noqa: E402
    BreatherSwap,
    ElementChange,
    Entry,
    Note,
    Reading,
    Sample,
    TopUp,
    Void,
)
from store.ledger.register import Breather, FilterPosition, Fluid, Technician, Unit  # noqa: E402
from store.physics.cleanliness import code_from_counts, parse_code, scale_number  # noqa: E402
from store.physics.normalise import dp_at_temp_bar  # noqa: E402

OUT_PATH = ROOT / "demo.db.sql"
SEED = 4406
PLANT = "Vellmark Die-Cast & Press Works"
TIMEZONE = "Europe/Vienna"
TZ = ZoneInfo(TIMEZONE)
REGISTERED = "2026-03-30T07:00:00Z"  # when the register was typed in (register_log times)
START = datetime(2026, 4, 1, 0, 0, tzinfo=TZ).astimezone(UTC)
CLOCK = datetime(2026, 11, 27, 12, 30, tzinfo=UTC)  # the story ends here; the book is frozen
SHUTDOWN = (
    datetime(2026, 8, 3, 6, 0, tzinfo=TZ).astimezone(UTC),
    datetime(2026, 8, 17, 6, 0, tzinfo=TZ).astimezone(UTC),
)
COOLER_FOULED = (date(2026, 7, 14), date(2026, 7, 21))  # DCC-2 runs hot until the fins are cleaned
LEAK_FROM = datetime(2026, 10, 30, 0, 0, tzinfo=TZ).astimezone(UTC)  # DCC-2 hose fitting weeps
TEAR_AT = datetime(2026, 11, 16, 3, 40, tzinfo=TZ).astimezone(UTC)  # M1-R element tears
UNFILTERED_DAY = date(2026, 11, 16)  # PR-3 topped up straight from a new can
NEAR_LIMIT_SHARE = 0.90  # D2-R ends at this share of its change limit
IMM1_HOURS_AT_START = 18_640.0
STEP_H = 0.25
SHIFTS = (("early", "06:00"), ("late", "14:00"), ("night", "22:00"))

# ---- the register ------------------------------------------------------------------------------

TECHNICIANS = [
    Technician(tag="AK"),
    Technician(tag="BM"),
    Technician(tag="CT"),
    Technician(tag="DR"),
    Technician(tag="EW"),
    Technician(tag="FH"),  # left at the end of June (made inactive after the story); DR took over
]
FLUIDS = [
    Fluid(
        tag="HM46",
        name="Mineral hydraulic oil ISO VG 46, zinc-free",
        iso_vg=46,
        nu40_cst=46.0,
        nu100_cst=6.8,
        density_kg_l=0.873,
    ),
    Fluid(
        tag="HV32",
        name="High-VI hydraulic oil ISO VG 32",
        iso_vg=32,
        nu40_cst=32.0,
        vi=150.0,
        density_kg_l=0.862,
    ),
]
UNITS = [
    Unit(
        tag="IMM-1",
        name="Injection moulding machine 350 t (tank heater 25 °C)",
        area="Hall A / moulding",
        reservoir_l=400.0,
        fluid="HM46",
        normal_temp_c=48.0,
        max_temp_c=60.0,
        coldest_start_c=25.0,
        hour_meter=True,
        target_code="17/15/12",
    ),
    Unit(
        tag="DCC-2",
        name="Cold-chamber die-casting cell 800 t (tank heater 30 °C)",
        area="Hall B / foundry",
        reservoir_l=900.0,
        fluid="HM46",
        normal_temp_c=50.0,
        max_temp_c=60.0,
        coldest_start_c=30.0,
        target_code="18/16/13",
    ),
    Unit(
        tag="PR-3",
        name="Trim press 250 t",
        area="Hall C / unheated press bay",
        reservoir_l=600.0,
        fluid="HM46",
        normal_temp_c=40.0,
        max_temp_c=60.0,
        coldest_start_c=5.0,
        target_code="18/16/13",
    ),
    Unit(
        tag="TS-4",
        name="Pump test stand (tank heater 25 °C)",
        area="Hall A / test bay",
        reservoir_l=250.0,
        fluid="HV32",
        normal_temp_c=45.0,
        max_temp_c=60.0,
        coldest_start_c=25.0,
        target_code="16/14/11",
    ),
]


def _fp(
    tag: str,
    unit: str,
    kind: str,
    element: str,
    rating: float,
    basis: str,
    beta: float | None,
    bypass: float,
    limit: float,
    clean: float,
    rated: float,
    normal: float,
    interval_h: float,
    gauge: bool = True,
) -> FilterPosition:
    return FilterPosition(
        tag=tag,
        unit=unit,
        kind=kind,
        element=element,
        rating_um=rating,
        rating_basis=basis,
        beta_ratio=beta,
        bypass_bar=bypass,
        limit_bar=limit,
        clean_bar=clean,
        rated_flow_lpm=rated,
        normal_flow_lpm=normal,
        gauge=gauge,
        reading_interval_h=interval_h,
    )


# Settings after DOMAIN.md §6 (common practice, no source): strainers ~0.2 bar bypass, return
# 1.7-3.5 bar, pressure 3.5-7 bar, change limit about 75-80 % of the bypass setting.
# Columns: tag, unit, kind, element part, rating µm, basis, beta, bypass / limit / clean ΔP (bar),
# rated / normal flow (L/min), reading interval (h).
FILTERS = [
    _fp("M1-SS", "IMM-1", "suction-strainer", "STR-125-A", 125, "nominal", None, 0.2, 0.15, 0.03, 400, 180, 168),
    _fp("M1-P", "IMM-1", "pressure", "PX-10-160", 10, "absolute", 1000, 7.0, 5.5, 0.8, 250, 160, 24),
    _fp("M1-R", "IMM-1", "return", "RT-10-250", 10, "absolute", 200, 2.5, 2.0, 0.35, 300, 220, 24),
    _fp("D2-SS", "DCC-2", "suction-strainer", "STR-149-B", 149, "nominal", None, 0.2, 0.15, 0.02, 600, 320, 168),
    _fp("D2-P", "DCC-2", "pressure", "PX-5-300", 5, "absolute", 1000, 6.0, 4.5, 0.6, 400, 250, 24),
    _fp("D2-R", "DCC-2", "return", "RT-10-400", 10, "absolute", 200, 3.5, 2.7, 0.4, 450, 300, 8),
    _fp("D2-K", "DCC-2", "offline", "KL-3-40", 3, "absolute", 1000, 3.5, 2.7, 0.3, 60, 40, 168),
    _fp("P3-S", "PR-3", "suction", "SU-25-200", 25, "nominal", None, 0.25, 0.2, 0.04, 300, 200, 168),
    _fp("P3-R", "PR-3", "return", "RT-20-200", 20, "absolute", 200, 3.0, 2.3, 0.3, 250, 150, 24),
    _fp("P3-PP", "PR-3", "pressure", "PP-10-30", 10, "absolute", 200, 5.0, 3.8, 0.5, 40, 25, 168, gauge=False),
    _fp("T4-P", "TS-4", "pressure", "PX-3-120", 3, "absolute", 1000, 7.0, 5.5, 0.7, 150, 100, 48),
    _fp("T4-R", "TS-4", "return", "RT-10-150", 10, "absolute", 200, 1.7, 1.3, 0.2, 200, 120, 48),
    _fp("T4-K", "TS-4", "offline", "KL-3-40", 3, "absolute", 1000, 3.5, 2.7, 0.3, 60, 40, 168),
]  # fmt: skip
BREATHERS = [
    Breather(tag="M1-BR", unit="IMM-1", kind="desiccant", rating_um=3, swap_interval_d=90),
    Breather(tag="D2-BR", unit="DCC-2", kind="desiccant", rating_um=3, swap_interval_d=60),
    Breather(tag="P3-BR", unit="PR-3", kind="plain", rating_um=10, swap_interval_d=180),
]


@dataclass(frozen=True)
class FilterPlan:
    """How the story treats one filter position."""

    schedule: str  # "shift", "daily" or "weekly"
    resolution_bar: float  # gauge resolution (0 for indicator only)
    life_op_h: float  # Weibull scale of element lives in operating hours
    shape: float = 3.0
    weekday: int = 2  # for weekly readings (0 = Monday)
    planned: bool = False  # changed at the summer shutdown when half used
    min_limit_changes: int = 0
    ending: str = "normal"  # "normal", "near-limit" or "torn"
    flow_logged: bool = False


PLANS = {
    "M1-SS": FilterPlan("weekly", 0.01, 9000, weekday=1, planned=True),
    "M1-P": FilterPlan("daily", 0.1, 1300, planned=True, min_limit_changes=1),
    "M1-R": FilterPlan("daily", 0.05, 750, planned=True, min_limit_changes=3, ending="torn"),
    "D2-SS": FilterPlan("weekly", 0.01, 8000, weekday=2, planned=True),
    "D2-P": FilterPlan("daily", 0.1, 1400, planned=True, min_limit_changes=1),
    "D2-R": FilterPlan("shift", 0.05, 800, min_limit_changes=4, ending="near-limit"),
    "D2-K": FilterPlan("weekly", 0.05, 900, weekday=3, min_limit_changes=2),
    "P3-S": FilterPlan("weekly", 0.01, 3000, weekday=1, planned=True),
    "P3-R": FilterPlan("daily", 0.05, 600, min_limit_changes=2),
    "P3-PP": FilterPlan("weekly", 0.0, 650, weekday=0, min_limit_changes=3),
    "T4-P": FilterPlan("daily", 0.1, 520, min_limit_changes=2, flow_logged=True),
    "T4-R": FilterPlan("daily", 0.05, 450, min_limit_changes=2, flow_logged=True),
    "T4-K": FilterPlan("weekly", 0.05, 600, weekday=2, min_limit_changes=2),
}
CHANGE_AT_SHARE = {"shift": 1.0, "daily": 0.98, "weekly": 0.9}  # when a reading calls a change
CART_UM = {"IMM-1": 10.0, "DCC-2": 3.0, "PR-3": 10.0, "TS-4": 3.0}


# ---- plant weather and timetables ----------------------------------------------------------------


def local(t: datetime) -> datetime:
    return t.astimezone(TZ)


def at_local(day: date, hour: float) -> datetime:
    """A plant-local wall-clock time on `day` (hour may be fractional) -> UTC, whole minutes."""
    minutes = round(hour * 60)
    wall = datetime(day.year, day.month, day.day, tzinfo=TZ) + timedelta(minutes=minutes)
    wall = datetime(wall.year, wall.month, wall.day, wall.hour, wall.minute, tzinfo=TZ)
    return wall.astimezone(UTC)


def in_shutdown(t: datetime) -> bool:
    return SHUTDOWN[0] <= t < SHUTDOWN[1]


def days() -> Iterator[date]:
    day = local(START).date()
    while day <= local(CLOCK).date():
        yield day
        day += timedelta(days=1)


@dataclass
class UnitModel:
    """Timetable and thermal behaviour of one unit, sampled every STEP_H hours."""

    tag: str
    normal_c: float
    heater_c: float | None
    warm_tau_h: float
    cool_tau_h: float
    hall_slope: float  # running temperature rises this much per °C of hall above 20 °C
    running: list[bool] = field(default_factory=list)
    op_h: list[float] = field(default_factory=list)  # cumulative operating hours
    oil_c: list[float] = field(default_factory=list)


class Plant:
    """The simulated plant: outdoor weather, halls, units running and their oil temperatures."""

    def __init__(self, rng: random.Random) -> None:
        self.n = int((CLOCK - START).total_seconds() / 3600 / STEP_H) + 8
        self.units = {
            "IMM-1": UnitModel("IMM-1", 48.0, 25.0, 1.2, 8.0, 0.30),
            "DCC-2": UnitModel("DCC-2", 50.0, 30.0, 2.0, 12.0, 0.45),
            "PR-3": UnitModel("PR-3", 40.0, None, 3.0, 10.0, 0.30),
            "TS-4": UnitModel("TS-4", 45.0, 25.0, 1.0, 5.0, 0.25),
        }
        weather: dict[date, float] = {}
        w = 0.0
        for day in days():
            w = 0.7 * w + rng.gauss(0.0, 2.2)
            weather[day] = w
        self.day_noise = {(u, d): rng.gauss(0.0, 1.0) for u in self.units for d in weather}
        test_runs = {
            (d, s): rng.random() < 0.75 for d in weather for s in ("early", "late")
        }  # the test stand runs pump tests in about three shifts of four
        lagged = None
        for i in range(self.n):
            t = START + timedelta(hours=i * STEP_H)
            lt = local(t)
            day = lt.date()
            doy = lt.timetuple().tm_yday
            hour = lt.hour + lt.minute / 60
            heat = 5.0 if date(2026, 7, 13) <= day <= date(2026, 7, 22) else 0.0
            outdoor = (
                11.5
                - 10.5 * math.cos(2 * math.pi * (doy - 15) / 365)
                + weather.get(day, 0.0)
                + heat
                + 4.5 * math.cos(2 * math.pi * (hour - 15) / 24)
            )
            lagged = (
                outdoor
                if lagged is None
                else lagged + (outdoor - lagged) * (1 - math.exp(-STEP_H / 4))
            )
            halls = {
                "IMM-1": min(max(20 + 0.3 * (lagged - 12), 18.0), 29.0),
                "TS-4": min(max(20 + 0.3 * (lagged - 12), 18.0), 29.0),
                "DCC-2": 25 + 0.4 * (lagged - 12),
                "PR-3": 3 + 0.8 * lagged,
            }
            for tag, m in self.units.items():
                run = self._runs(tag, lt, test_runs) and not in_shutdown(t)
                if i == 0:
                    m.oil_c.append(halls[tag] + 8)
                    m.op_h.append(0.0)
                else:
                    prev_run = m.running[-1]
                    m.op_h.append(m.op_h[-1] + (STEP_H if prev_run else 0.0))
                    if prev_run:
                        target = m.normal_c + m.hall_slope * (halls[tag] - 20)
                        target += self.day_noise[(tag, day)]
                        if tag == "DCC-2" and COOLER_FOULED[0] <= day < COOLER_FOULED[1]:
                            target += 6.0
                        tau = m.warm_tau_h
                    else:
                        target = max(halls[tag], m.heater_c or -99.0)
                        tau = m.cool_tau_h
                    m.oil_c.append(
                        m.oil_c[-1] + (target - m.oil_c[-1]) * (1 - math.exp(-STEP_H / tau))
                    )
                m.running.append(run)

    @staticmethod
    def _runs(tag: str, lt: datetime, test_runs: dict) -> bool:
        wd, hour = lt.weekday(), lt.hour
        if tag == "IMM-1":  # Monday 06:00 to Saturday 06:00, round the clock
            return not (wd == 5 and hour >= 6 or wd == 6 or wd == 0 and hour < 6)
        if tag == "DCC-2":  # Monday 06:00 to Sunday 06:00
            return not (wd == 6 and hour >= 6 or wd == 0 and hour < 6)
        if tag == "PR-3":  # two shifts on weekdays
            return wd < 5 and 6 <= hour < 22
        if tag == "TS-4":  # pump tests in some day shifts
            if wd >= 5 or not 6 <= hour < 22:
                return False
            return test_runs.get((lt.date(), "early" if hour < 14 else "late"), False)
        raise ValueError(tag)

    def _index(self, t: datetime) -> tuple[int, float]:
        x = (t - START).total_seconds() / 3600 / STEP_H
        i = min(max(int(x), 0), self.n - 2)
        return i, x - i

    def running(self, unit: str, t: datetime) -> bool:
        return self.units[unit].running[self._index(t)[0]]

    def op_h(self, unit: str, t: datetime) -> float:
        m = self.units[unit]
        i, frac = self._index(t)
        return m.op_h[i] + (frac * STEP_H if m.running[i] else 0.0)

    def oil_c(self, unit: str, t: datetime) -> float:
        m = self.units[unit]
        i, frac = self._index(t)
        return m.oil_c[i] + frac * (m.oil_c[i + 1] - m.oil_c[i])


# ---- people ------------------------------------------------------------------------------------


def shift_of(t: datetime) -> tuple[str, date]:
    lt = local(t)
    if 6 <= lt.hour < 14:
        return "early", lt.date()
    if 14 <= lt.hour < 22:
        return "late", lt.date()
    return "night", lt.date() if lt.hour >= 22 else lt.date() - timedelta(days=1)


def tech_on(t: datetime, rng: random.Random) -> str:
    """Three crews rotate weekly through early, late and night; EW works weekday days."""
    name, day = shift_of(t)
    crews = (["AK"], ["BM"], ["CT", "FH" if day < date(2026, 7, 1) else "DR"])
    crew = list(crews[([s for s, _ in SHIFTS].index(name) + day.isocalendar().week) % 3])
    if name == "early" and day.weekday() < 5:
        crew.append("EW")
    return rng.choice(crew)


# ---- filter elements ---------------------------------------------------------------------------


@dataclass
class Element:
    fit_op_h: float
    life_op_h: float
    lin_share: float
    growth_k: float
    clean_bar: float
    fitted_at: datetime | None = None

    def share(self, age_op_h: float) -> float:
        """g(u): 0 when fitted, 1 at the end of its life (the change limit)."""
        u = max(age_op_h, 0.0) / self.life_op_h
        k = self.growth_k
        return self.lin_share * u + (1 - self.lin_share) * math.expm1(k * u) / math.expm1(k)

    def dp_ref_bar(self, op_h: float, limit_bar: float) -> float:
        return self.clean_bar + (limit_bar - self.clean_bar) * self.share(op_h - self.fit_op_h)

    def age_for_share(self, target: float) -> float:
        lo, hi = 0.0, self.life_op_h
        for _ in range(60):
            mid = (lo + hi) / 2
            lo, hi = (mid, hi) if self.share(mid) < target else (lo, mid)
        return (lo + hi) / 2


def new_element(
    rng: random.Random, pos: FilterPosition, plan: FilterPlan, fit_op_h: float
) -> Element:
    life = plan.life_op_h * rng.weibullvariate(1.0, plan.shape) / math.gamma(1 + 1 / plan.shape)
    return Element(
        fit_op_h=fit_op_h,
        life_op_h=max(life, 0.3 * plan.life_op_h),
        lin_share=rng.uniform(0.25, 0.45),
        growth_k=rng.uniform(2.5, 4.0),
        clean_bar=(pos.clean_bar or 0.1) * rng.uniform(0.95, 1.08),
    )


def reading_slots(
    plant: Plant, pos: FilterPosition, plan: FilterPlan, rng: random.Random
) -> list[datetime]:
    """When the technicians pass by this filter (while its unit runs)."""
    unit = pos.unit
    slots: list[datetime] = []
    night_runs = unit in ("IMM-1", "DCC-2")
    for day in days():
        if plan.schedule == "shift":
            candidates = [(day, 6.0), (day, 14.0)] + ([(day, 22.0)] if night_runs else [])
            for d, h in candidates:
                t = at_local(d, h + rng.uniform(0.5, 7.0))
                if plant.running(unit, t) and rng.random() > 0.03:
                    slots.append(t)
        elif plan.schedule == "daily":
            order = [6.0, 14.0] + ([22.0] if night_runs else [])
            weights = [0.55, 0.3, 0.15][: len(order)]
            first = rng.choices(order, weights)[0]
            order.remove(first)
            for h in [first, *order]:
                t = at_local(day, h + rng.triangular(0.3, 7.0, 0.6))  # rounds start the shift
                if plant.running(unit, t):
                    if rng.random() > 0.04:
                        slots.append(t)
                    break
        elif plan.schedule == "weekly" and day.weekday() == plan.weekday:
            for d, h in [
                (day, 6.0),
                (day, 14.0),
                (day + timedelta(days=1), 6.0),
                (day + timedelta(days=1), 14.0),
            ]:
                t = at_local(d, h + min(0.15 + rng.expovariate(1.2), 6.5))  # first round
                if plant.running(unit, t):
                    slots.append(t)
                    break
    return [t for t in slots if t < CLOCK - timedelta(minutes=5)]


EntryPlan = tuple[type[Entry], dict[str, object]]  # an entry to be made: its kind and fields


@dataclass
class FilterStory:
    entries: list[tuple[datetime, EntryPlan]]
    elements: list[Element]
    limit_changes: int


class Story:
    """Collects entries; every entry gets its id from one seeded generator, in creation order."""

    def __init__(self, plant: Plant) -> None:
        self.plant = plant
        self.ids = random.Random(f"{SEED}:ids")
        self.entries: list[Entry] = []

    def new_id(self) -> str:
        return str(uuid.UUID(int=self.ids.getrandbits(128), version=4))

    def add(self, cls: type[Entry], at: datetime, **fields: object) -> Entry:
        at = at.replace(second=0, microsecond=0)
        entry = cls(id=self.new_id(), at=at, logged=at, **fields)
        self.entries.append(entry)
        return entry

    def hours(self, unit: str, t: datetime) -> float | None:
        if unit != "IMM-1":
            return None
        return round(IMM1_HOURS_AT_START + self.plant.op_h(unit, t), 1)


def gauge_reading(
    ctx: FilterContext,
    dp_ref: float,
    temp_c: float,
    flow_lpm: float | None,
    resolution: float,
    rng: random.Random,
) -> float:
    """What the gauge shows: the reference ΔP at the reading's temperature and flow, rounded."""
    actual = dp_at_temp_bar(dp_ref, temp_c, ctx.curve, ctx.reference)
    if flow_lpm is not None and ctx.reference.flow_ref_lpm:
        actual *= flow_lpm / ctx.reference.flow_ref_lpm
    actual = actual * (1 + rng.gauss(0.0, 0.012)) + rng.gauss(0.0, 0.2 * resolution)
    return round(max(round(actual / resolution), 0) * resolution, 2)


CONDITIONS = {
    "limit": (
        "even grey silt cake, pleats intact",
        "fine silt and some fibres",
        "dark sludge in the pleat roots",
        "silt with a few bright metal fines",
        "normal loading, no damage",
    ),
    "indicator": ("indicator red; evenly loaded", "indicator red; fine silt, pleats intact"),
    "interval": ("light loading, pleats intact", "moderate loading, clean seals"),
    "bypass": ("gauge at the bypass setting on a cool start; heavy silt cake",),
    "strainer": ("lint and a few chips; cleaned in solvent and refitted",),
}


def simulate_filter(
    story: Story, ctx: FilterContext, attempt: int, override: tuple[int, float] | None = None
) -> FilterStory:
    """One filter's readings and element changes; `override` fixes one element's life."""
    plant, pos = story.plant, ctx.position
    plan = PLANS[pos.tag]
    base = f"{SEED}:{pos.tag}:{attempt}"
    slots = reading_slots(plant, pos, plan, random.Random(base + ":slots"))
    noise = random.Random(base + ":noise")
    lives = random.Random(base + ":lives")
    out: list[tuple[datetime, EntryPlan]] = []
    elements: list[Element] = []

    def fit(op_h: float, at: datetime | None) -> Element:
        el = new_element(lives, pos, plan, op_h)
        if override and override[0] == len(elements):
            el.life_op_h = override[1]
        el.fitted_at = at
        elements.append(el)
        return el

    def log_change(at: datetime, by: str, reason: str, note: str = "") -> None:
        strainer = pos.kind == "suction-strainer"  # a strainer is cleaned and refitted
        fields = dict(
            filter=pos.tag,
            by=by,
            reason=reason,
            condition=noise.choice(CONDITIONS["strainer" if strainer else reason]),
            batch="cleaned" if strainer else batch(at, noise),
            hours=story.hours(pos.unit, at),
            note=note,
        )
        out.append((at, (ElementChange, fields)))

    el = fit(0.0, None)
    el.fit_op_h = -lives.uniform(0.1, 0.6) * el.life_op_h  # in service before the book began
    limit, changes = pos.limit_bar or 1.0, 0
    planned_done = False
    cold_unit = pos.unit == "PR-3"
    for t in slots:
        if plan.planned and not planned_done and t >= SHUTDOWN[0]:
            planned_done = True
            op = plant.op_h(pos.unit, SHUTDOWN[0])
            if pos.kind == "suction-strainer" or el.share(op - el.fit_op_h) > 0.3:
                at = at_local(local(SHUTDOWN[0]).date() + timedelta(days=1), noise.uniform(7.5, 13))
                log_change(at, noise.choice(["EW", "AK"]), "interval", "summer shutdown")
                el = fit(op, at)
        temp = plant.oil_c(pos.unit, t)
        dp_ref = el.dp_ref_bar(plant.op_h(pos.unit, t), limit)
        if plan.ending == "torn" and t >= TEAR_AT:
            dp_ref = el.clean_bar * 0.55
        if cold_unit and pos.gauge:  # the gauge would pin at the bypass: let the oil warm first
            for _ in range(8):
                if dp_at_temp_bar(dp_ref, temp, ctx.curve, ctx.reference) < 0.95 * (
                    pos.bypass_bar or 9
                ):
                    break
                t += timedelta(minutes=30)
                temp = plant.oil_c(pos.unit, t)
                dp_ref = el.dp_ref_bar(plant.op_h(pos.unit, t), limit)
        temp_c = float(round(temp + noise.gauss(0.0, 0.4)))
        flow = None
        if plan.flow_logged:
            flow = float(round((pos.normal_flow_lpm or 100) * noise.uniform(0.55, 1.05)))
        by = tech_on(t, noise)
        fields: dict[str, object] = dict(
            filter=pos.tag, by=by, temp_c=temp_c, hours=story.hours(pos.unit, t)
        )
        pinned = False
        if pos.gauge:
            fields["dp_bar"] = gauge_reading(ctx, dp_ref, temp_c, flow, plan.resolution_bar, noise)
            if pos.bypass_bar and fields["dp_bar"] >= pos.bypass_bar:
                fields["dp_bar"], pinned = pos.bypass_bar, True  # the bypass valve holds it there
            if flow is not None:
                fields["flow_lpm"] = flow
        else:
            fields["indicator"] = (
                "bypass"
                if dp_ref >= (pos.bypass_bar or 99)
                else "dirty"
                if dp_ref >= limit
                else "clean"
            )
        out.append((t, (Reading, fields)))
        share = (dp_ref - el.clean_bar) / (limit - el.clean_bar)
        due = share >= CHANGE_AT_SHARE[plan.schedule] if pos.gauge else share >= 1.0
        if (due or pinned) and not (plan.ending == "torn" and t >= TEAR_AT):
            at = t + timedelta(minutes=noise.randint(30, 110))
            reason = "bypass" if pinned else "limit" if pos.gauge else "indicator"
            log_change(at, by, reason)
            changes += 1
            el = fit(plant.op_h(pos.unit, at), at)
    return FilterStory(out, elements, changes)


def batch(at: datetime, rng: random.Random) -> str:
    year, week, _ = local(at).isocalendar()
    return f"L{year % 100:02d}{week:02d}-{rng.randint(100, 999)}"


def plan_filter(story: Story, ctx: FilterContext) -> FilterStory:
    """Try seeded attempts until the filter's part of the story comes out as written."""
    pos, plan = ctx.position, PLANS[ctx.position.tag]
    limit = pos.limit_bar or 1.0
    for attempt in range(400):
        first = simulate_filter(story, ctx, attempt)
        if first.limit_changes < plan.min_limit_changes:
            continue
        last_index = len(first.elements) - 1
        final = first.elements[-1]
        if final.fitted_at is None:
            continue
        if plan.ending == "near-limit":
            last_t = max(t for t, (cls, _) in first.entries if cls is Reading)
            age = story.plant.op_h(pos.unit, last_t) - final.fit_op_h
            target = (NEAR_LIMIT_SHARE * limit - final.clean_bar) / (limit - final.clean_bar)
            life = age / (final.age_for_share(target) / final.life_op_h)
        elif plan.ending == "torn":
            if TEAR_AT - final.fitted_at < timedelta(days=20):
                continue
            age = story.plant.op_h(pos.unit, TEAR_AT) - final.fit_op_h
            life = age / final.age_for_share(0.55) * final.life_op_h
        else:
            age = story.plant.op_h(pos.unit, CLOCK) - final.fit_op_h
            if final.share(age) > 0.7:  # only D2-R may end close to its limit
                continue
            fitted = [e.fitted_at for e in first.elements if e.fitted_at is not None]
            shortest = min((b - a for a, b in zip(fitted, fitted[1:], strict=False)), default=None)
            if not pos.gauge and shortest and CLOCK - fitted[-1] > 0.6 * shortest:
                continue  # the indicator-only element should be young: its due date comes from lives
            return first
        if not 0.7 * plan.life_op_h <= life <= 1.4 * plan.life_op_h:
            continue
        result = simulate_filter(story, ctx, attempt, override=(last_index, life))
        if result.limit_changes == first.limit_changes:
            return result
    raise RuntimeError(f"no attempt gave {pos.tag} its story")


# ---- fluid care --------------------------------------------------------------------------------

TOPUP_RATE_L_PER_DAY = {"IMM-1": 0.45, "DCC-2": 0.75, "PR-3": 0.30, "TS-4": 0.15}
TOPUP_LOT_L = {"IMM-1": 5.0, "DCC-2": 8.0, "PR-3": 4.0, "TS-4": 2.0}
LEAK_RATE_L_PER_DAY = 2.6


def topups(story: Story, rng: random.Random) -> None:
    for unit in TOPUP_RATE_L_PER_DAY:
        missing = rng.uniform(0.0, TOPUP_LOT_L[unit])
        for day in days():
            t = at_local(day, rng.uniform(8.0, 12.5))
            if t >= CLOCK:
                break
            rate = TOPUP_RATE_L_PER_DAY[unit]
            if unit == "DCC-2" and t >= LEAK_FROM:
                rate = LEAK_RATE_L_PER_DAY
            if story.plant.running(unit, t):
                missing += rate * rng.uniform(0.6, 1.4) * (24 / 16 if unit == "PR-3" else 1)
            unfiltered = unit == "PR-3" and day == UNFILTERED_DAY
            if not unfiltered and (missing < TOPUP_LOT_L[unit] or day.weekday() >= 5):
                continue
            if in_shutdown(t):
                continue
            volume = max(round(missing * 2) / 2, 2.0)
            filtered: float | None = CART_UM[unit]
            note = ""
            if unfiltered:
                filtered = None
                note = "poured straight from a new 20 L can: the filter cart was at the foundry"
            elif unit == "DCC-2" and t >= LEAK_FROM:
                note = rng.choice(["level low again", "", "leak: level down since last top-up"])
            story.add(
                TopUp,
                t,
                unit=unit,
                by=tech_on(t, rng),
                volume_l=volume,
                filtered_um=filtered,
                hours=story.hours(unit, t),
                note=note,
            )
            missing = 0.0


# ISO 4406 scale numbers of each sample: (date, unit, code, water ppm)
SAMPLES = [
    ("2026-04-09", "IMM-1", "16/14/11", 95), ("2026-05-21", "IMM-1", "17/15/11", 110),
    ("2026-07-02", "IMM-1", "16/15/12", 120), ("2026-08-27", "IMM-1", "16/14/11", 90),
    ("2026-10-08", "IMM-1", "17/15/12", 105), ("2026-11-19", "IMM-1", "17/14/11", 115),
    ("2026-04-15", "DCC-2", "18/16/12", 210), ("2026-05-27", "DCC-2", "17/16/13", 240),
    ("2026-07-08", "DCC-2", "18/16/13", 280), ("2026-09-02", "DCC-2", "17/15/12", 190),
    ("2026-10-14", "DCC-2", "18/15/12", 230), ("2026-11-25", "DCC-2", "18/16/13", 260),
    ("2026-04-22", "PR-3", "17/15/12", 260), ("2026-06-10", "PR-3", "18/16/12", 210),
    ("2026-07-29", "PR-3", "17/16/13", 190), ("2026-09-16", "PR-3", "17/15/12", 240),
    ("2026-10-28", "PR-3", "18/16/13", 330), ("2026-11-24", "PR-3", "20/18/14", 420),
    ("2026-04-29", "TS-4", "15/13/10", 60), ("2026-06-17", "TS-4", "16/14/11", 75),
    ("2026-07-22", "TS-4", "16/14/10", 80), ("2026-09-09", "TS-4", "15/14/11", 70),
    ("2026-11-04", "TS-4", "16/13/10", 65),
]  # fmt: skip


def _scale_floor(number: int) -> float:
    """Smallest count per mL that store.physics.cleanliness puts at this scale number (bisection)."""
    lo, hi = 1e-4, 3e6
    for _ in range(100):
        mid = math.sqrt(lo * hi)
        lo, hi = (mid, hi) if scale_number(mid) < number else (lo, mid)
    return hi


def counts_for(code: str, rng: random.Random) -> tuple[float, float, float]:
    """Counts per mL at ≥4/≥6/≥14 µm(c) that give `code` (checked against store.physics.cleanliness)."""
    parsed = parse_code(code)
    result = []
    for number in (parsed.c4, parsed.c6, parsed.c14):
        lo, hi = _scale_floor(number), _scale_floor(number + 1)
        for _ in range(100):
            guess = lo * (hi / lo) ** rng.uniform(0.15, 0.85)
            value = (
                round(guess)
                if guess >= 100
                else round(guess, 1)
                if guess >= 10
                else round(guess, 2)
            )
            if scale_number(value) == number:
                break
        else:
            raise RuntimeError(f"no count for scale number {number}")
        result.append(float(value))
    if str(code_from_counts(*result)) != code:
        raise RuntimeError(f"counts {result} do not give {code}")
    return result[0], result[1], result[2]


def samples(story: Story, rng: random.Random) -> None:
    seen: set[str] = set()
    for day_text, unit, code, water in SAMPLES:
        t = at_local(date.fromisoformat(day_text), rng.uniform(9.0, 11.0))
        c4, c6, c14 = counts_for(code, rng)
        note = "" if unit in seen else "sampling valve on the pressure line; outside lab"
        if code == "20/18/14":
            note = "after the unfiltered top-up on 16 Nov: off-line cart asked for"
        seen.add(unit)
        story.add(
            Sample,
            t,
            unit=unit,
            by="EW",
            c4_per_ml=c4,
            c6_per_ml=c6,
            c14_per_ml=c14,
            water_ppm=float(water),
            note=note,
        )


BREATHER_SWAPS = [
    ("M1-BR", "2026-04-14", "interval", "1/3 spent"),
    ("M1-BR", "2026-07-09", "interval", "2/3 spent"),
    ("M1-BR", "2026-10-05", "interval", "2/3 spent"),
    ("D2-BR", "2026-04-08", "interval", "2/3 spent"),
    ("D2-BR", "2026-05-28", "spent", "spent, colour changed all the way"),
    ("D2-BR", "2026-08-05", "spent", "spent"),
    ("D2-BR", "2026-09-21", "spent", "spent; foundry air is humid"),
    ("P3-BR", "2026-04-20", "interval", "dusty element"),
    ("P3-BR", "2026-10-19", "interval", "dusty, water marks inside the cap"),
]
NOTES = [
    ("2026-04-01T06:40", None, "Logbook started. Elements in service today were fitted earlier; their ages are unknown."),
    ("2026-05-12T10:15", "TS-4", "Stand re-piped for the new pump series; flow meter checked against the master meter."),
    ("2026-07-16T15:30", "DCC-2", "Oil at 61-62 °C in the afternoons: cooler fins clogged with die-spray dust."),
    ("2026-07-21T09:10", "DCC-2", "Cooler fins and fan cleaned during the mould change; oil back near 55 °C."),
    ("2026-08-03T06:30", None, "Summer shutdown until 17 Aug: planned element changes, strainers cleaned."),
    ("2026-10-19T09:40", "PR-3", "Plain breather in an unheated hall: water marks in the cap. Desiccant breather requested."),
    ("2026-11-09T06:50", "PR-3", "Hall C heating still off: oil at 6 °C at start. Press run unloaded 20 min before production."),
    ("2026-11-10T11:20", "DCC-2", "Oil film under the accumulator skid; source not found yet. Looked with lamp and card, system depressurised."),
    ("2026-11-25T13:05", "DCC-2", "Leak traced to a weeping hose fitting on the accumulator block. Hose ordered; topping up meanwhile."),
]  # fmt: skip


def fluid_care(story: Story) -> None:
    rng = random.Random(f"{SEED}:fluidcare")
    topups(story, rng)
    samples(story, rng)
    for tag, day_text, reason, condition in BREATHER_SWAPS:
        t = at_local(date.fromisoformat(day_text), rng.uniform(8.5, 10.5))
        story.add(BreatherSwap, t, breather=tag, by="EW", reason=reason, condition=condition)
    for when, unit, text in NOTES:
        t = datetime.fromisoformat(when).replace(tzinfo=TZ).astimezone(UTC)
        story.add(Note, t, unit=unit, by=tech_on(t, rng), note=text)


def add_typo_and_void(story: Story, d2r: FilterStory) -> None:
    """One reading typed ten times too big on D2-R, voided and logged again 25 minutes later."""
    for t, (cls, fields) in d2r.entries:
        if (
            cls is Reading
            and t >= datetime(2026, 9, 15, 6, 0, tzinfo=TZ)
            and 1.0 <= fields["dp_bar"] <= 3.0
        ):
            wrong = story.add(Reading, t, **{**fields, "dp_bar": round(fields["dp_bar"] * 10, 1)})
            story.add(
                Void,
                t + timedelta(minutes=25),
                by=fields["by"],
                voids=wrong.id,
                note=f"typed {fields['dp_bar'] * 10:.1f} for {fields['dp_bar']:.2f} bar; logged again",
            )
            d2r.entries.remove((t, (cls, fields)))
            d2r.entries.append((t + timedelta(minutes=26), (cls, fields)))
            return
    raise RuntimeError("no D2-R reading to mistype")


# ---- building the book and dumping it ----------------------------------------------------------


def populate(book: Book) -> None:
    book.set_setting("name", PLANT)
    book.set_setting("timezone", TIMEZONE)
    book.set_setting("clock", format_utc(CLOCK))
    for group in (TECHNICIANS, FLUIDS, UNITS, FILTERS, BREATHERS):
        for item in group:
            register.add(book, item, by="EW")
    register.set_shifts(book, list(SHIFTS), by="EW")
    plant = Plant(random.Random(f"{SEED}:plant"))
    story = Story(plant)
    stories = {tag: plan_filter(story, ctx) for tag, ctx in sorted(contexts(book).items())}
    add_typo_and_void(story, stories["D2-R"])
    for tag in sorted(stories):
        for t, (cls, fields) in sorted(stories[tag].entries, key=lambda e: e[0]):
            story.add(cls, t, **fields)
    fluid_care(story)
    ordered = sorted(story.entries, key=lambda e: (e.at, e.kind == "void"))
    record.log_many(book, ordered)
    # An inactive technician cannot log: FH is made inactive once the story is written.
    register.update(book, Technician, "FH", {"active": False}, by="EW")


TABLE_ORDER = {
    "settings": "key",
    "technicians": "tag",
    "fluids": "tag",
    "units": "tag",
    "filters": "unit, tag",
    "breathers": "tag",
    "shifts": "position",
    "entries": "at_utc, rowid",
    "register_log": "rowid",
}


def sql_literal(value: object) -> str:
    if isinstance(value, bool):
        return str(int(value))
    if isinstance(value, int):
        return str(value)
    if isinstance(value, float):
        if not math.isfinite(value):
            raise ValueError("cannot write a non-finite number")
        return repr(value)
    if isinstance(value, str):
        return "'" + value.replace("'", "''") + "'"
    raise TypeError(f"cannot write {type(value).__name__}")


def dump(book: Book) -> str:
    """Data-only SQL: one INSERT per row, NULL columns left out, foreign keys satisfied in order."""
    ids = random.Random(f"{SEED}:register-log")
    lines = [
        f"-- sumpbook demo plant: {PLANT}, an invented die-casting and press shop.",
        "-- Everything in it is made up: the plant, its machines, the people (initials only) and",
        "-- every reading. It tells eight months (April to November 2026) as they might have gone.",
        f"-- Data only (INSERT statements) for logbook schema version {SCHEMA_VERSION}",
        "-- (store.db.schema.SCHEMA_VERSION); `sumpbook demo` loads it into a freshly migrated book.",
        "-- Generated by tests/make_demo.py: do not edit; run `python tests/make_demo.py` instead.",
        f"-- The book is frozen at {format_utc(CLOCK)} (setting 'clock'), where the story ends.",
        "",
    ]
    conn = book.conn
    for table, order in TABLE_ORDER.items():
        columns = [row[1] for row in conn.execute(f"PRAGMA table_info({table})")]
        for row in conn.execute(f"SELECT {', '.join(columns)} FROM {table} ORDER BY {order}"):
            values = dict(zip(columns, row, strict=True))
            if table == "register_log":  # uuid4 ids written by the store: make them repeatable
                values["id"] = str(uuid.UUID(int=ids.getrandbits(128), version=4))
            present = {k: v for k, v in values.items() if v is not None}
            names = ", ".join(present)
            literals = ", ".join(sql_literal(v) for v in present.values())
            lines.append(f"INSERT INTO {table}({names}) VALUES({literals});")
    return "\n".join(lines) + "\n"


@contextmanager
def no_write_hooks() -> Iterator[None]:
    """Skip the status-cache refresh after each entry: the cache is derived, not demo data,
    and refreshing it ~2000 times against the story's final clock would only cost time."""
    kept = record.after_write
    record.after_write = lambda book, entries: None
    try:
        yield
    finally:
        record.after_write = kept


def build_sql() -> str:
    """The demo plant as SQL text (builds it in a temporary logbook)."""
    with tempfile.TemporaryDirectory() as folder, no_write_hooks():
        # The store stamps register changes with the book's clock: fixed, the output repeats.
        book = open_book(Path(folder) / "demo-build.db", clock=fixed_clock(REGISTERED))
        try:
            book.conn.execute("PRAGMA synchronous = OFF")  # a scratch file: speed over safety
            populate(book)
            return dump(book)
        finally:
            book.close()


def main() -> int:
    sql = build_sql()
    OUT_PATH.write_text(sql, encoding="utf-8", newline="\n")
    entries = sum(1 for line in sql.splitlines() if line.startswith("INSERT INTO entries("))
    print(f"wrote {OUT_PATH} ({len(sql.encode()) / 1024:.0f} KiB, {entries} entries)")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
