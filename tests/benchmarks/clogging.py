"""Benchmark: forecast the clogging of real filters as a technician would log them.

Data: the PHM Society European Conference 2020 data challenge runs (24 run-to-failure filter
clogging experiments; see shared/data/phme20/SOURCE.md). Each run is read as one element's life
on one filter position; the other runs are the earlier elements of that position (leave one out).

A technician reads the gauge at roughly every 3 % of the element's life, at irregular intervals,
and writes the value to the gauge's 0.5 psi step. Change limit: 20 psi, the challenge's own
clogging rule. Rig seconds stand in for hours (1 s -> 1 h). Particle size and solid ratio are never
read: a technician does not know them.

Raw or flow-normalised ΔP? Raw. The rig's flow falls as the filter clogs because the pump cannot
hold it against the rising resistance: that is part of the clogging, identical from run to run,
not a change of operating point to correct for. The limit (and the bypass it protects) acts on the
raw ΔP, so raw readings, raw earlier curves and a raw limit keep the forecast on the quantity that
trips. (In service, where flow and viscosity change for other reasons, the app normalises first.)

Run:  python tests/benchmarks/clogging.py   (env SUMPBOOK_CLOGGING_DATA overrides the folder)
"""

from __future__ import annotations

import csv
import math
import os
import sys
from collections.abc import Sequence
from dataclasses import dataclass
from pathlib import Path

import numpy as np

if __package__ in (None, ""):
    sys.path.insert(0, str(Path(__file__).resolve().parents[2]))

from store.trend import ElementReadings, PastElement, forecast  # noqa: E402
from store.units import to_bar  # noqa: E402

# 1 psi = 0.45359237 kg x 9.80665 m/s² / (0.0254 m)² = 0.06894757293168361 bar (REFERENCES.md §5)
PSI_TO_BAR = to_bar(1.0, "psi")
LIMIT_PSI = 20.0  # the data challenge's clogging rule (SOURCE.md)
GAUGE_STEP_PSI = 0.5
READ_EVERY = 0.03  # share of the element's life between readings, on average
CHECK_FRACTIONS = (0.5, 0.7, 0.85)
METHODS = ("sumpbook", "fixed interval", "line, last 3")


def data_dir() -> Path:
    env = os.environ.get("SUMPBOOK_CLOGGING_DATA")
    if env:
        return Path(env)
    return Path(__file__).resolve().parents[3] / "shared" / "data" / "phme20"


@dataclass(frozen=True)
class Run:
    name: str
    t_s: np.ndarray
    dp_psi: np.ndarray
    start_s: int  # pump running steadily from here: element age 0
    clog_s: int  # first second with ΔP over 20 psi

    @property
    def life_h(self) -> float:
        return float(self.clog_s - self.start_s)


def pump_start_s(t_s: np.ndarray, flow_ml_min: np.ndarray) -> int:
    """First second at which the flow reaches half its typical running value.

    The logs open with the pump off (flow near 0) for 4-12 s (SOURCE.md); age 0 is when it runs.
    """
    typical = float(np.median(flow_ml_min))
    return int(t_s[np.argmax(flow_ml_min >= 0.5 * typical)])


def load_runs(folder: Path, names: Sequence[str] | None = None) -> list[Run]:
    """Load the runs (all, or the named ones), cut at the pump start and the 20 psi crossing."""
    runs = []
    with open(folder / "runs.csv", newline="") as fh:
        rows = list(csv.DictReader(fh))
    for row in rows:
        name = row["run"]
        if names is not None and name not in names:
            continue
        data = np.loadtxt(folder / f"run_{name}.csv", delimiter=",", skiprows=1)
        t_s, dp_psi, flow = data[:, 0], data[:, 1], data[:, 2]
        clog_s = int(row["t_clog_s"])
        keep = t_s <= clog_s
        runs.append(Run(name, t_s[keep], dp_psi[keep], pump_start_s(t_s, flow), clog_s))
    return runs


def technician_log(run: Run, seed: int) -> tuple[np.ndarray, np.ndarray]:
    """Readings before the crossing: (element ages in h, ΔP in bar rounded to the gauge step)."""
    rng = np.random.default_rng([seed, int(run.name)])
    step = READ_EVERY * run.life_h
    ages = []
    age = step * rng.uniform(0.3, 1.0)
    while age < run.life_h:
        ages.append(age)
        age += step * rng.uniform(0.5, 1.5)
    ages_h = np.array(ages)
    second = np.clip(np.rint(run.start_s + ages_h), run.t_s[0], run.clog_s - 1)
    dp = np.interp(second, run.t_s, run.dp_psi)
    dp = np.round(dp / GAUGE_STEP_PSI) * GAUGE_STEP_PSI
    return ages_h, dp * PSI_TO_BAR


@dataclass(frozen=True)
class Call:
    """One method's forecast of the crossing age at one point of one run."""

    run: str
    fraction: float
    method: str
    likely_h: float
    earliest_h: float
    true_h: float
    now_h: float
    basis: str = ""

    @property
    def error(self) -> float:
        """|forecast - true| remaining life, as a share of the true remaining life."""
        return abs(self.likely_h - self.true_h) / (self.true_h - self.now_h)


def _sumpbook(ages: np.ndarray, dp: np.ndarray, now: float, earlier: list[PastElement]):
    fc = forecast(
        ElementReadings(tuple(ages), tuple(dp)),
        clean_bar=None,
        limit_bar=LIMIT_PSI * PSI_TO_BAR,
        bypass_bar=None,
        now_age_h=now,
        earlier=earlier,
    )
    if fc.to_limit is not None:
        return fc.to_limit.likely_h, fc.to_limit.earliest_h, fc.basis
    if fc.state == "past-limit":
        return now, now, fc.basis
    return math.inf, math.inf, fc.basis


def line_last_three(ages: np.ndarray, dp: np.ndarray, limit_bar: float) -> float:
    """Baseline: least-squares line through the last three readings, extended to the limit."""
    if ages.size < 2:
        return math.inf
    a, b = ages[-3:], dp[-3:]
    slope, icept = np.polyfit(a, b, 1)
    if slope <= 0:
        return math.inf
    return max(float((limit_bar - icept) / slope), float(a[-1]))


def evaluate(runs: Sequence[Run], fractions=CHECK_FRACTIONS, seed: int = 1) -> list[Call]:
    """Every method at every check point of every run, the other runs as its history."""
    logs = {r.name: technician_log(r, seed) for r in runs}
    limit_bar = LIMIT_PSI * PSI_TO_BAR
    calls = []
    for run in runs:
        others = [o for o in runs if o is not run]
        earlier = [
            PastElement(tuple(logs[o.name][0]), tuple(logs[o.name][1]), o.life_h, True)
            for o in others
        ]
        mean_life = float(np.mean([o.life_h for o in others]))
        ages_all, dp_all = logs[run.name]
        for frac in fractions:
            now = frac * run.life_h
            seen = ages_all <= now
            ages, dp = ages_all[seen], dp_all[seen]
            likely, earliest, basis = _sumpbook(ages, dp, now, earlier)
            line = line_last_three(ages, dp, limit_bar)
            for method, lk, ea, bs in (
                ("sumpbook", likely, earliest, basis),
                ("fixed interval", mean_life, mean_life, ""),
                ("line, last 3", line, line, ""),
            ):
                calls.append(Call(run.name, frac, method, lk, ea, run.life_h, now, bs))
    return calls


@dataclass(frozen=True)
class Score:
    median_error: float
    likely_late: float
    earliest_late: float
    n: int


def score(calls: Sequence[Call], method: str, fraction: float) -> Score:
    sel = [c for c in calls if c.method == method and c.fraction == fraction]
    return Score(
        median_error=float(np.median([c.error for c in sel])),
        likely_late=float(np.mean([c.likely_h > c.true_h for c in sel])),
        earliest_late=float(np.mean([c.earliest_h > c.true_h for c in sel])),
        n=len(sel),
    )


def _pct(x: float) -> str:
    if not math.isfinite(x):
        return "never"
    return ">999%" if x > 9.99 else f"{x:.1%}"


def table(calls: Sequence[Call], fractions=CHECK_FRACTIONS) -> str:
    lines = [
        f"{'life used':>9}  {'method':<15} {'median error':>12} {'likely late':>11} "
        f"{'earliest late':>13}"
    ]
    for frac in fractions:
        for method in METHODS:
            s = score(calls, method, frac)
            lines.append(
                f"{frac:>9.0%}  {method:<15} {_pct(s.median_error):>12} {s.likely_late:>11.0%} "
                f"{s.earliest_late:>13.0%}"
            )
    return "\n".join(lines)


def main(argv: Sequence[str] = ()) -> int:
    """Print the table for seed 1; with a number N, also the 70 % row for seeds 1..N."""
    folder = data_dir()
    if not (folder / "runs.csv").is_file():
        print(f"clogging data not found at {folder}; nothing to benchmark")
        return 0
    runs = load_runs(folder)
    calls = evaluate(runs)
    n_readings = np.mean([technician_log(r, 1)[0].size for r in runs])
    print(
        f"{len(runs)} runs, leave-one-out; about {n_readings:.0f} readings per life; "
        f"limit {LIMIT_PSI:g} psi; gauge step {GAUGE_STEP_PSI:g} psi"
    )
    print("median error: |forecast - true| remaining life / true remaining life")
    print("likely/earliest late: share of forecasts after the true crossing")
    print(table(calls))
    bases = [c.basis for c in calls if c.method == "sumpbook"]
    print("sumpbook basis: " + ", ".join(f"{b} {bases.count(b)}" for b in sorted(set(bases))))
    n_seeds = int(argv[0]) if argv else 1
    if n_seeds > 1:
        print(f"sumpbook at 70 % of life over technician logs with seeds 1-{n_seeds}:")
        for seed in range(1, n_seeds + 1):
            s = score(evaluate(runs, fractions=(0.7,), seed=seed), "sumpbook", 0.7)
            print(
                f"  seed {seed}: median error {s.median_error:.1%}, likely late "
                f"{s.likely_late:.0%}, earliest late {s.earliest_late:.0%}"
            )
    return 0


if __name__ == "__main__":
    raise SystemExit(main(sys.argv[1:]))
