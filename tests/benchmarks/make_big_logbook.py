"""Write a large synthetic logbook for the speed benchmark (tests/benchmarks/speed.py).

Usage:  python tests/benchmarks/make_big_logbook.py N_UNITS YEARS PATH [--seed S] [--end ISO]
        e.g. python tests/benchmarks/make_big_logbook.py 200 5 /tmp/big.db

The plant is invented. Per unit: a return filter, a pressure filter and an off-line (kidney
loop) filter with ΔP gauges, and a suction strainer with a visual indicator only; three units
in four have a desiccant breather. 200 units give 800 filter positions and 150 breathers.
Every filter is read every shift (3 × 8 h), so 5 years hold about 4.4 million entries.

How the numbers are made (seeded, so the same arguments give the same book):
- Each element loads along clean + (limit - clean) · g(age / life), with
  g(u) = c·u + (1 - c)·(exp(k·u) - 1)/(exp(k) - 1): slow at first, then faster. Lives are drawn
  from a Weibull per position (operating hours on units with an hour meter, else calendar
  hours). An element is changed on the shift its reading reaches the change limit, about one
  in eight earlier (planned, right-censored) and one in a hundred for damage.
- The gauge shows that reference ΔP at the oil temperature of the reading (the unit's normal
  temperature, the season, noise, a cold start now and then), rounded to the gauge's step.
- Top-ups every few days (a few unfiltered), a sample a month, breather swaps every ~90 days
  with the cartridge's condition, a note now and then, and about one reading in 3000 typed
  wrong, voided and logged again.

Speed: rows are made with numpy per filter, sorted by time, and written in one transaction with
the secondary indexes dropped and made again afterwards. The derived rows are then rebuilt
through the store (store.record.rebuild), as `sumpbook rebuild` would. The book is frozen
at the end of its last shift (setting 'clock'), so every run of the benchmark sees the same
"now"; delete that setting to let the book age.
"""

from __future__ import annotations

import argparse
import math
import multiprocessing
import sqlite3
import sys
import time
from collections.abc import Iterator
from dataclasses import asdict, dataclass
from datetime import UTC, datetime, timedelta
from pathlib import Path
from zoneinfo import ZoneInfo

import numpy as np

ROOT = Path(__file__).resolve().parents[2]
if str(ROOT) not in sys.path:  # run as a script from anywhere
    sys.path.insert(0, str(ROOT))

from store.base.timeutil import format_utc  # noqa: E402
from store.db.book import open_book  # noqa: E402
from store.ledger.register import Breather, FilterPosition, Fluid, Technician, Unit  # noqa: E402
from store.physics.cleanliness import code_from_counts  # noqa: E402
from store.physics.fluid import KELVIN_OFFSET, walther_coefficients  # noqa: E402

TIMEZONE = "Europe/Berlin"
TZ = ZoneInfo(TIMEZONE)
SHIFTS = (("early", "06:00"), ("late", "14:00"), ("night", "22:00"))
DEFAULT_END = "2026-06-01T04:00:00Z"  # just before the early shift of 1 June 2026 (local)
COLUMNS = (
    "id", "at_utc", "logged_utc", "kind", "by", "unit", "filter", "breather", "dp_bar",
    "indicator", "temp_c", "flow_lpm", "hours", "reason", "condition", "batch", "volume_l",
    "fluid", "filtered_um", "c4_per_ml", "c6_per_ml", "c14_per_ml", "code", "water_ppm",
    "voids", "note",
)  # fmt: skip
K_READING, K_OTHER = 0, 1
INDICATORS = (None, "clean", "dirty", "bypass")
AREAS = ("die casting", "press hall", "machining", "foundry", "paint shop", "assembly",
         "rolling mill", "extrusion", "test bay", "utilities")  # fmt: skip
# (kind, tag suffix, gauge, limit, bypass, clean, life scale h, gauge step bar, rating µm)
POSITIONS = (
    ("return", "RF", True, 2.5, 3.5, 0.35, 1800.0, 0.05, 10.0),
    ("pressure", "PF", True, 5.0, 7.0, 0.8, 3200.0, 0.1, 3.0),
    ("offline", "OF", True, 2.0, 2.5, 0.25, 900.0, 0.05, 6.0),
    ("suction-strainer", "SS", False, 0.15, 0.2, 0.03, 5000.0, 0.0, 74.0),
)
FLUIDS = (  # invented oils; ν40 and ν100 in the range of their ISO VG grades
    Fluid(tag="HM32", name="mineral HM 32", iso_vg=32, nu40_cst=32.0, nu100_cst=5.4),
    Fluid(tag="HM46", name="mineral HM 46", iso_vg=46, nu40_cst=46.0, nu100_cst=6.8),
    Fluid(tag="HV46", name="mineral HV 46", iso_vg=46, nu40_cst=45.0, nu100_cst=8.0),
    Fluid(tag="HM68", name="mineral HM 68", iso_vg=68, nu40_cst=68.0, nu100_cst=8.7),
)


@dataclass
class Rows:
    """Entries as column arrays (one list per column while building, numpy after)."""

    t: list
    kind: list
    unit: list
    filt: list
    dp: list
    temp: list
    hours: list
    ind: list
    tech: list
    extra: list  # index into `others` for entries that are not plain readings, else -1

    @classmethod
    def empty(cls) -> Rows:
        return cls(*([] for _ in range(10)))


def shift_starts(end: datetime, years: float) -> np.ndarray:
    """UTC epoch seconds of every shift start from `years` before `end` up to it."""
    first = (end - timedelta(days=round(365.25 * years))).astimezone(TZ).date()
    last = end.astimezone(TZ).date()
    starts = []
    day = first
    while day <= last:
        for _, hhmm in SHIFTS:
            h, m = (int(x) for x in hhmm.split(":"))
            moment = datetime(day.year, day.month, day.day, h, m, tzinfo=TZ).astimezone(UTC)
            if moment + timedelta(hours=6) <= end:  # the round is over by then
                starts.append(moment.timestamp())
        day += timedelta(days=1)
    return np.array(starts, dtype=np.int64)


def tech_tags(n: int, rng: np.random.Generator) -> list[str]:
    letters = "ABCDEFGHJKLMNPRSTVW"
    tags: list[str] = []
    while len(tags) < n:
        tag = "".join(rng.choice(list(letters), 2))
        if tag not in tags:
            tags.append(tag)
    return tags


def make_register(n_units: int, rng: np.random.Generator) -> dict[str, list]:
    units, filters, breathers = [], [], []
    for i in range(n_units):
        tag = f"U{i + 1:03d}"
        normal = float(rng.choice([45, 50, 50, 55]))
        units.append(
            Unit(
                tag=tag,
                name=f"power unit {i + 1}",
                area=AREAS[i % len(AREAS)],
                reservoir_l=float(rng.choice([100, 250, 400, 630, 1000, 1600])),
                fluid=FLUIDS[int(rng.integers(len(FLUIDS)))].tag,
                normal_temp_c=normal,
                max_temp_c=normal + 12,
                coldest_start_c=float(rng.choice([25, 30, 35])),  # heated halls
                hour_meter=bool(rng.random() < 0.3),
                target_code=str(rng.choice(["17/15/12", "18/16/13", "16/14/11"])),
            )
        )
        for kind, suffix, gauge, limit, bypass, clean, _, _, rating in POSITIONS:
            size = int(rng.integers(3))  # three element sizes per kind: like positions share one
            flow = float(rng.choice([40, 80, 120, 200, 300]))
            filters.append(
                FilterPosition(
                    tag=f"{tag}-{suffix}",
                    unit=tag,
                    kind=kind,
                    element=f"{suffix}-{rating:g}-{'ABC'[size]}",
                    rating_um=rating,
                    beta_ratio=1000.0 if gauge else None,
                    bypass_bar=bypass,
                    limit_bar=limit,
                    clean_bar=clean,
                    rated_flow_lpm=flow * 1.5,
                    normal_flow_lpm=flow,
                    gauge=gauge,
                    reading_interval_h=8.0,
                )
            )
        if i % 4 != 3:
            breathers.append(Breather(tag=f"{tag}-BR", unit=tag, rating_um=3.0))
    techs = [Technician(tag=t, name="") for t in tech_tags(24, rng)]
    return {"technicians": techs, "fluids": list(FLUIDS), "units": units,
            "filters": filters, "breathers": breathers}  # fmt: skip


def write_register(conn: sqlite3.Connection, register: dict[str, list], end: datetime) -> None:
    for table, records in register.items():
        for record in records:
            row = asdict(record)
            names = ", ".join(row)
            marks = ", ".join("?" for _ in row)
            conn.execute(f"INSERT INTO {table} ({names}) VALUES ({marks})", list(row.values()))
    for pos, (name, starts) in enumerate(SHIFTS):
        conn.execute("INSERT INTO shifts(name, starts, position) VALUES (?, ?, ?)",
                     [name, starts, pos])  # fmt: skip
    for key, value in (
        ("name", "Synthetic plant (benchmark)"),
        ("timezone", TIMEZONE),
        ("clock", format_utc(end)),
    ):
        conn.execute("INSERT INTO settings(key, value) VALUES (?, ?)", [key, value])


def loading(u: np.ndarray, c: float, k: float) -> np.ndarray:
    u = np.minimum(u, 20.0)  # far past the limit: the element is changed long before
    return c * u + (1 - c) * np.expm1(k * u) / math.expm1(k)


def simulate(register: dict[str, list], starts: np.ndarray, end: datetime,
             rng: np.random.Generator) -> tuple[Rows, list[dict]]:  # fmt: skip
    rows = Rows.empty()
    others: list[dict] = []
    n_tech = len(register["technicians"])
    n_rounds = starts.size
    days = (starts - starts[0]) / 86400.0
    season = np.sin(2 * np.pi * (days / 365.25 - 0.3))
    early = np.arange(n_rounds) % 3 == 0  # the pattern starts with the early shift
    fidx = {f.tag: i for i, f in enumerate(register["filters"])}
    bidx = {b.tag: i for i, b in enumerate(register["breathers"])}
    end_s = end.timestamp()

    def other(t: float, unit: int, tech: int, filt: int = -1, **values: object) -> None:
        rows.t.append(np.array([t], dtype=np.int64))
        rows.kind.append(np.array([K_OTHER], dtype=np.int8))
        rows.unit.append(np.array([unit], dtype=np.int16))
        rows.filt.append(np.array([filt], dtype=np.int16))
        for col in (rows.dp, rows.temp, rows.hours):
            col.append(np.array([np.nan]))
        rows.ind.append(np.array([0], dtype=np.int8))
        rows.tech.append(np.array([tech], dtype=np.int16))
        rows.extra.append(np.array([len(others)], dtype=np.int32))
        others.append(values)

    for ui, unit in enumerate(register["units"]):
        fluid = next(f for f in FLUIDS if f.tag == unit.fluid)
        a, b = walther_coefficients(fluid.nu40_cst, fluid.nu100_cst)

        def nu(temp_c: np.ndarray, a: float = a, b: float = b) -> np.ndarray:
            return 10.0 ** (10.0 ** (a - b * np.log10(temp_c + KELVIN_OFFSET))) - 0.7

        nu_ref = float(nu(np.array([unit.normal_temp_c]))[0])
        t_round = starts + rng.integers(1800, 5 * 3600, n_rounds)
        temp = unit.normal_temp_c + 3 * season + rng.normal(0, 1.5, n_rounds)
        cold = early & (rng.random(n_rounds) < 0.03)
        temp[cold] = unit.coldest_start_c + rng.uniform(0, 10, cold.sum())
        hot = rng.random(n_rounds) < 0.001
        temp[hot] = unit.max_temp_c + rng.uniform(1, 5, hot.sum())
        temp = np.round(temp)
        shift_tech = np.arange(n_rounds) // 3 * 7 + np.arange(n_rounds) % 3 * 5 + ui // 10
        shift_tech = (shift_tech % n_tech).astype(np.int16)
        if unit.hour_meter:
            run_h = 8.0 * rng.uniform(0.55, 1.0, n_rounds)
            meter = 12_000.0 * rng.random() + np.cumsum(run_h)
            hours = np.floor(meter)
        else:
            hours = np.full(n_rounds, np.nan)
        for pi, spec in enumerate(POSITIONS):
            kind, suffix, gauge, limit, bypass, clean, scale_h, step, _ = spec
            filt = fidx[f"{unit.tag}-{suffix}"]
            t = t_round + pi * 90 + rng.integers(0, 60, n_rounds)
            base = hours if unit.hour_meter else (t - t[0]) / 3600.0
            shape = rng.uniform(2.5, 4.0)
            scale = scale_h * rng.uniform(0.7, 1.4)
            dp_ref = np.empty(n_rounds)
            i, origin = 0, base[0] - scale * rng.uniform(0.0, 0.5)
            while i < n_rounds:
                life = scale * rng.weibull(shape)
                c, k = rng.uniform(0.2, 0.5), rng.uniform(3.0, 6.0)
                clean_e = clean * rng.uniform(0.9, 1.1)
                ages = base[i:] - origin
                if i == 0 and ages[0] >= life:  # it would be spent before the book opens
                    origin = base[0]
                    ages = base[i:] - origin
                curve = clean_e + (limit - clean_e) * loading(np.maximum(ages, 0) / life, c, k)
                stop = int(np.searchsorted(curve >= limit, True))  # first reading at the limit
                reason = "indicator" if not gauge else "limit"
                draw = rng.random()
                if draw < 0.12 or draw > 0.99:  # planned early change, or a damaged element
                    early_age = life * (
                        rng.uniform(0.4, 0.9) if draw < 0.12 else rng.uniform(0.1, 0.6)
                    )
                    stop_early = int(np.searchsorted(ages, early_age))
                    if stop_early < stop:
                        stop, reason = stop_early, "interval" if draw < 0.12 else "damage"
                last = min(i + stop, n_rounds - 1)
                dp_ref[i : last + 1] = curve[: last + 1 - i]
                if i + stop >= n_rounds:
                    break  # the element still in service
                t_change = t[last] + int(rng.integers(600, 3000))
                if t_change >= end_s:
                    break
                other(t_change, ui, int(shift_tech[last]), filt, kind="change", reason=reason,
                      hours=None if np.isnan(hours[last]) else float(hours[last]),
                      condition=str(rng.choice(["", "", "sludge on the pleats",
                                                "dark, loaded evenly", "fibres on the end cap"])),
                      batch=f"L{int(rng.integers(10_000, 99_999))}")  # fmt: skip
                origin = base[last] if unit.hour_meter else (t_change - t[0]) / 3600.0
                i = last + 1
            noisy = dp_ref * (1 + rng.normal(0, 0.03, n_rounds))
            actual = noisy * nu(temp) / nu_ref
            if gauge:
                dp = np.maximum(np.round(actual / step) * step, 0.0)
                dp = np.round(dp, 2)
                ind = np.zeros(n_rounds, dtype=np.int8)
            else:
                dp = np.full(n_rounds, np.nan)
                ind = np.where(actual >= bypass, 3, np.where(actual >= limit, 2, 1)).astype(np.int8)
                ind[dp_ref >= limit] = np.maximum(ind[dp_ref >= limit], 2)
            rows.t.append(t)
            rows.kind.append(np.zeros(n_rounds, dtype=np.int8))
            rows.unit.append(np.full(n_rounds, ui, dtype=np.int16))
            rows.filt.append(np.full(n_rounds, filt, dtype=np.int16))
            rows.dp.append(dp)
            rows.temp.append(temp)
            rows.hours.append(hours)
            rows.ind.append(ind)
            rows.tech.append(shift_tech)
            rows.extra.append(np.full(n_rounds, -1, dtype=np.int32))
            if gauge:  # a reading typed wrong now and then: voided and logged again
                for j in np.flatnonzero(rng.random(n_rounds) < 1 / 3000):
                    wrong = min(round(float(dp[j]) * 10, 2), 99.0) if dp[j] > 0 else 1.0
                    typo = len(others)
                    other(int(t[j]) - 300, ui, int(shift_tech[j]), filt, kind="reading",
                          dp_bar=wrong, temp_c=float(temp[j]),
                          hours=None if np.isnan(hours[j]) else float(hours[j]))  # fmt: skip
                    other(int(t[j]) - 120, ui, int(shift_tech[j]), kind="void", voids=typo,
                          note="typed wrong: decimal point")  # fmt: skip
        # Fluid care on the unit.
        t0, t1 = float(starts[0]), end_s - 3600
        t_top = t0 + 86400 * rng.uniform(2, 9)
        while t_top < t1:
            ri = min(int(np.searchsorted(starts, t_top)), n_rounds - 1)
            filtered = rng.random()
            other(t_top, ui, int(shift_tech[ri]), kind="topup",
                  volume_l=float(rng.choice([5, 10, 10, 20, 20, 40])), fluid=unit.fluid,
                  filtered_um=None if filtered < 0.04 else (25.0 if filtered < 0.1 else 3.0),
                  hours=None if np.isnan(hours[ri]) else float(hours[ri]))  # fmt: skip
            t_top += 86400 * rng.uniform(2, 9)
        t_sample = t0 + 86400 * rng.uniform(5, 30)
        while t_sample < t1:
            ri = min(int(np.searchsorted(starts, t_sample)), n_rounds - 1)
            c14 = float(np.round(rng.lognormal(math.log(20), 0.6), 1))
            c6, c4 = round(c14 * rng.uniform(6, 12), 1), round(c14 * rng.uniform(30, 60), 1)
            other(t_sample, ui, int(shift_tech[ri]), kind="sample", c4_per_ml=c4, c6_per_ml=c6,
                  c14_per_ml=c14, code=str(code_from_counts(c4, c6, c14)),
                  water_ppm=float(round(rng.uniform(40, 300))))  # fmt: skip
            t_sample += 86400 * rng.uniform(25, 35)
        t_note = t0 + 86400 * rng.uniform(10, 60)
        while t_note < t1:
            ri = min(int(np.searchsorted(starts, t_note)), n_rounds - 1)
            other(t_note, ui, int(shift_tech[ri]), kind="note",
                  note=str(rng.choice(["hose clamps checked", "cooler fins cleaned",
                                       "pump noise at start, settled after 5 min",
                                       "level sight glass cleaned", "accumulator precharge ok"])))  # fmt: skip
            t_note += 86400 * rng.uniform(20, 60)
        tag = f"{unit.tag}-BR"
        if tag in bidx:
            t_swap = t0 + 86400 * rng.uniform(1, 90)
            while t_swap < t1:
                ri = min(int(np.searchsorted(starts, t_swap)), n_rounds - 1)
                other(t_swap, ui, int(shift_tech[ri]), kind="breather", breather=tag,
                      reason="interval",
                      condition=str(rng.choice(["1/3 spent", "half spent", "2/3 spent", "spent"])))  # fmt: skip
                t_swap += 86400 * rng.uniform(75, 100)
    return rows, others


def _ids(n: int, rng: np.random.Generator) -> list[str]:
    """n version-4 UUID strings from the seeded generator (repeatable, unlike uuid4())."""
    raw = np.frombuffer(rng.bytes(16 * n), dtype=np.uint8).reshape(n, 16).copy()
    raw[:, 6] = (raw[:, 6] & 0x0F) | 0x40
    raw[:, 8] = (raw[:, 8] & 0x3F) | 0x80
    text = raw.tobytes().hex()
    out = []
    for i in range(n):
        h = text[32 * i : 32 * i + 32]
        out.append(f"{h[:8]}-{h[8:12]}-{h[12:16]}-{h[16:20]}-{h[20:]}")
    return out


def _stamps(seconds: np.ndarray) -> list[str]:
    return [s + "Z" for s in np.datetime_as_string(seconds.astype("datetime64[s]"), unit="s")]


def write_entries(conn: sqlite3.Connection, register: dict[str, list], rows: Rows,
                  others: list[dict], rng: np.random.Generator, chunk: int = 50_000) -> int:  # fmt: skip
    """Insert every entry in time order, in batches."""
    t = np.concatenate(rows.t)
    kind = np.concatenate(rows.kind)
    unit = np.concatenate(rows.unit)
    filt = np.concatenate(rows.filt)
    dp = np.concatenate(rows.dp)
    temp = np.concatenate(rows.temp)
    hours = np.concatenate(rows.hours)
    ind = np.concatenate(rows.ind)
    tech = np.concatenate(rows.tech)
    extra = np.concatenate(rows.extra)
    order = np.argsort(t, kind="stable")
    n = int(order.size)
    ids = _ids(n, rng)
    # Where each `others` entry lands, so that a void can name the entry it cancels.
    where = np.empty(len(others), dtype=np.int64)
    pos_of_extra = extra[order]
    sel = np.flatnonzero(pos_of_extra >= 0)
    where[pos_of_extra[sel]] = sel
    units = [u.tag for u in register["units"]]
    fluids = {u.tag: u.fluid for u in register["units"]}
    filters = [f.tag for f in register["filters"]]
    techs = [x.tag for x in register["technicians"]]
    delay = rng.integers(30, 1800, n)
    empty = dict.fromkeys(COLUMNS)

    def batches() -> Iterator[list[tuple]]:
        for lo in range(0, n, chunk):
            idx = order[lo : lo + chunk]
            at = _stamps(t[idx])
            logged = _stamps(t[idx] + delay[lo : lo + chunk])
            cols = [a.tolist() for a in (kind[idx], unit[idx], filt[idx], dp[idx], temp[idx],
                                         hours[idx], ind[idx], tech[idx], extra[idx])]  # fmt: skip
            batch = []
            for j, (k, u, f, d, tc, h, i, by, x) in enumerate(zip(*cols, strict=True)):
                if k == K_READING:
                    batch.append((ids[lo + j], at[j], logged[j], "reading", techs[by], units[u],
                                  filters[f], None, None if d != d else d, INDICATORS[i],
                                  None if tc != tc else tc, None, None if h != h else h, None,
                                  None, None, None, None, None, None, None, None, None, None,
                                  None, ""))  # fmt: skip
                    continue
                values = {**empty, **others[x]}
                values.update(id=ids[lo + j], at_utc=at[j], logged_utc=logged[j], by=techs[by])
                if values["kind"] != "void":
                    values["unit"] = units[u]
                if f >= 0:
                    values["filter"] = filters[f]
                if values["kind"] == "topup" and values["fluid"] is None:
                    values["fluid"] = fluids[units[u]]
                if values["voids"] is not None:
                    values["voids"] = ids[int(where[values["voids"]])]
                if values["note"] is None:
                    values["note"] = ""
                batch.append(tuple(values[c] for c in COLUMNS))
            yield batch

    sql = f"INSERT INTO entries ({', '.join(COLUMNS)}) VALUES ({', '.join('?' * len(COLUMNS))})"
    if "fork" not in multiprocessing.get_all_start_methods():
        for batch in batches():
            conn.executemany(sql, batch)
        return n
    # A forked child makes the row tuples (it shares the arrays above) while this process
    # has SQLite write the previous batch: the two cores work side by side.
    receive, send = multiprocessing.get_context("fork").Pipe(duplex=False)

    def produce() -> None:
        receive.close()
        for batch in batches():
            send.send(batch)
        send.send(None)
        send.close()

    maker = multiprocessing.get_context("fork").Process(target=produce, daemon=True)
    maker.start()
    send.close()
    while (batch := receive.recv()) is not None:
        conn.executemany(sql, batch)
    maker.join()
    return n


def build(
    n_units: int, years: float, path: Path, seed: int, end: datetime, cache: bool = True
) -> dict[str, float]:
    times: dict[str, float] = {}
    started = time.perf_counter()
    for suffix in ("", "-wal", "-shm"):
        Path(str(path) + suffix).unlink(missing_ok=True)
    path.parent.mkdir(parents=True, exist_ok=True)
    open_book(path).close()  # the schema, through the store's own migrations
    rng = np.random.default_rng(seed)
    register = make_register(n_units, rng)
    starts = shift_starts(end, years)
    rows, others = simulate(register, starts, end, rng)
    times["simulate_s"] = time.perf_counter() - started

    conn = sqlite3.connect(path, isolation_level=None)
    conn.execute("PRAGMA journal_mode = DELETE")  # one big load: no WAL copy of every page
    conn.execute("PRAGMA synchronous = OFF")
    conn.execute("PRAGMA cache_size = -400000")
    conn.execute("BEGIN IMMEDIATE")
    write_register(conn, register, end)
    indexes = conn.execute(
        "SELECT name, sql FROM sqlite_master WHERE type = 'index' AND tbl_name = 'entries' "
        "AND sql IS NOT NULL"
    ).fetchall()
    for name, _ in indexes:
        conn.execute(f"DROP INDEX {name}")
    mark = time.perf_counter()
    count = write_entries(conn, register, rows, others, rng)
    times["insert_s"] = time.perf_counter() - mark
    mark = time.perf_counter()
    for _, sql in indexes:
        conn.execute(sql)
    conn.execute("COMMIT")
    times["index_s"] = time.perf_counter() - mark
    conn.execute("PRAGMA journal_mode = WAL")
    conn.close()
    times["entries"] = count

    times["filters"] = len(register["filters"])
    times["rebuild_s"] = 0.0
    if cache:
        from store.record import rebuild

        mark = time.perf_counter()
        with open_book(path) as book:
            rebuild(book)
        times["rebuild_s"] = time.perf_counter() - mark
    times["total_s"] = time.perf_counter() - started
    times["size_mb"] = path.stat().st_size / 1e6
    return times


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("n_units", type=int)
    parser.add_argument("years", type=float)
    parser.add_argument("path", type=Path)
    parser.add_argument("--seed", type=int, default=4406)
    parser.add_argument("--end", default=DEFAULT_END, help=f"end of the story, UTC ({DEFAULT_END})")
    parser.add_argument(
        "--no-cache", action="store_true", help="leave the status cache empty (no rebuild)"
    )
    args = parser.parse_args(argv)
    if args.n_units < 1 or not 0 < args.years <= 30:
        parser.error("give at least one unit and 0-30 years")
    end = datetime.strptime(args.end, "%Y-%m-%dT%H:%M:%SZ").replace(tzinfo=UTC)
    times = build(args.n_units, args.years, args.path, args.seed, end, not args.no_cache)
    print(
        f"{args.path}: {times['entries']:,} entries, {args.n_units} units, "
        f"{int(times['filters'])} filters, {times['size_mb']:.0f} MB in {times['total_s']:.0f} s "
        f"(simulate {times['simulate_s']:.0f} s, insert {times['insert_s']:.0f} s, "
        f"indexes {times['index_s']:.0f} s, status rebuild {times['rebuild_s']:.0f} s)"
    )
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
