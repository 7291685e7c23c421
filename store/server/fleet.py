"""The fleet views on the server (`sumpbook fleet due`, `sumpbook fleet lives`).

What is computed where:

- **On the server, in SQL:** which positions of which plants are flagged or due (the newest
  live reading and element change of each position, found through the partial indexes
  `entries_readings` / `entries_changes`, one index probe per position; voids through the
  unique (plant, voids) index), and every element's change-to-change lives with the reason it
  was taken out (a window over the covering `entries_changes` index), grouped by part number
  and plant. Only the flagged rows and the lives travel, never the entries.
- **On the laptop, in Python:** the Weibull fit of those lives with right-censoring
  (`store.forecast.life.fit_weibull`, the method of a position's own service life; a life
  ended for a reason other than the limit, indicator or bypass is censored, as in
  `store.health.lives`) and the B10 / median ages.
- **Not on the server:** the ΔP-trend forecast of each position (the growth fits and earlier
  curves of `store.forecast.trend` run in Python on a laptop's own book); the fleet list
  flags what the register and the newest readings say, each laptop's list says more.
"""

from __future__ import annotations

from dataclasses import dataclass
from datetime import datetime, timedelta
from typing import TYPE_CHECKING, Any

from store.base.errors import BookError
from store.base.timeutil import format_utc
from store.forecast.life import fit_weibull
from store.health.elements import REACHED_REASONS
from store.server.address import connect, scrub, shown

if TYPE_CHECKING:
    import psycopg

DUE_SOON = timedelta(days=7)

# One row per flagged or due position: filters by their newest live reading (of the element
# now in: not older than its newest change) and reading interval, breathers by their swap.
# Readings of one time: the one that reached the server last (`seq`), as a book reads them,
# the one written last (a laptop pushes in its writing order).
WATCH_SQL = """
WITH pos AS (
    SELECT f.plant, f.tag, f.unit, f.limit_bar, f.bypass_bar, f.reading_interval_h
    FROM filters f WHERE %(plant)s::text IS NULL OR f.plant = %(plant)s
)
SELECT p.plant, 'filter' AS what, p.tag, p.unit, r.at_utc AS last_utc, r.dp_bar, r.indicator,
    CASE
        WHEN r.at_utc IS NOT NULL AND (c.at_utc IS NULL OR r.at_utc >= c.at_utc)
             AND (r.indicator = 'bypass' OR r.dp_bar >= p.bypass_bar) THEN 'bypass'
        WHEN r.at_utc IS NOT NULL AND (c.at_utc IS NULL OR r.at_utc >= c.at_utc)
             AND (r.indicator = 'dirty' OR r.dp_bar >= p.limit_bar) THEN 'at limit'
        WHEN r.at_utc IS NULL OR r.at_utc::timestamptz
             + make_interval(secs => p.reading_interval_h * 3600) < %(now)s THEN 'reading overdue'
        ELSE 'reading due'
    END AS flag,
    coalesce(r.at_utc::timestamptz, %(now)s) + make_interval(secs => p.reading_interval_h * 3600)
        AS due
FROM pos p
LEFT JOIN LATERAL (
    SELECT e.at_utc, e.dp_bar, e.indicator FROM entries e
    WHERE e.plant = p.plant AND e.filter = p.tag AND e.kind = 'reading'
      AND e.at_utc <= %(now_text)s
      AND NOT EXISTS (SELECT 1 FROM entries v WHERE v.plant = e.plant AND v.voids = e.id)
    ORDER BY e.at_utc DESC, e.seq DESC LIMIT 1
) r ON true
LEFT JOIN LATERAL (
    SELECT e.at_utc FROM entries e
    WHERE e.plant = p.plant AND e.filter = p.tag AND e.kind = 'change'
      AND e.at_utc <= %(now_text)s
      AND NOT EXISTS (SELECT 1 FROM entries v WHERE v.plant = e.plant AND v.voids = e.id)
    ORDER BY e.at_utc DESC LIMIT 1
) c ON true
WHERE r.at_utc IS NULL
   OR r.at_utc::timestamptz + make_interval(secs => p.reading_interval_h * 3600)
      < %(soon)s
   OR ((c.at_utc IS NULL OR r.at_utc >= c.at_utc)
       AND (r.indicator IN ('dirty', 'bypass') OR r.dp_bar >= p.limit_bar
            OR r.dp_bar >= p.bypass_bar))
UNION ALL
SELECT b.plant, 'breather', b.tag, b.unit, s.at_utc, NULL, NULL,
    CASE WHEN s.at_utc IS NULL OR s.at_utc::timestamptz
              + make_interval(days => b.swap_interval_d::int) < %(now)s
         THEN 'swap overdue' ELSE 'swap due' END,
    coalesce(s.at_utc::timestamptz, %(now)s) + make_interval(days => b.swap_interval_d::int)
FROM breathers b
LEFT JOIN LATERAL (
    SELECT e.at_utc FROM entries e
    WHERE e.plant = b.plant AND e.breather = b.tag AND e.kind = 'breather'
      AND e.at_utc <= %(now_text)s
      AND NOT EXISTS (SELECT 1 FROM entries v WHERE v.plant = e.plant AND v.voids = e.id)
    ORDER BY e.at_utc DESC LIMIT 1
) s ON true
WHERE (%(plant)s::text IS NULL OR b.plant = %(plant)s)
  AND (s.at_utc IS NULL OR s.at_utc::timestamptz
       + make_interval(days => b.swap_interval_d::int) < %(soon)s)
ORDER BY 1, 7 NULLS LAST, 3
"""

# Change-to-change lives per part number and plant, with whether each reached the limit.
LIVES_SQL = """
WITH changes AS (
    SELECT e.plant, lower(f.element) AS part, e.at_utc::timestamptz AS at, e.reason,
        lag(e.at_utc::timestamptz) OVER (PARTITION BY e.plant, e.filter ORDER BY e.at_utc, e.seq)
            AS before
    FROM entries e
    JOIN filters f ON f.plant = e.plant AND f.tag = e.filter
    WHERE e.kind = 'change' AND f.element <> ''
      AND (%(plant)s::text IS NULL OR e.plant = %(plant)s)
      AND (%(part)s::text IS NULL OR lower(f.element) = lower(%(part)s))
      AND NOT EXISTS (SELECT 1 FROM entries v WHERE v.plant = e.plant AND v.voids = e.id)
)
SELECT part, plant,
    array_agg(extract(epoch FROM at - before) / 3600 ORDER BY at) AS lives_h,
    array_agg(reason = ANY(%(reached)s) ORDER BY at) AS reached
FROM changes
WHERE before IS NOT NULL AND at > before
GROUP BY part, plant
ORDER BY part, plant
"""


@dataclass(frozen=True)
class WatchRow:
    plant: str
    what: str  # filter | breather
    tag: str
    unit: str
    last_utc: str | None
    dp_bar: float | None
    indicator: str | None
    flag: str  # bypass | at limit | reading overdue | reading due | swap overdue | swap due
    due: datetime | None


@dataclass(frozen=True)
class ElementLives:
    part: str  # the element part number, lower case
    plant: str  # a plant, or '*' for every plant together
    lives: int
    reached: int  # lives ended at the limit, indicator or bypass (the rest are censored)
    shape: float | None
    scale_h: float | None
    b10_h: float | None
    median_h: float | None


def _run(conninfo: str, sql: str, params: dict[str, Any]) -> list[tuple[Any, ...]]:
    import psycopg

    conn: psycopg.Connection = connect(conninfo)
    try:
        return conn.execute(sql, params).fetchall()
    except psycopg.errors.UndefinedTable:
        raise BookError(
            "the server holds no sumpbook schema: its owner runs 'sumpbook server init URL'"
        ) from None
    except psycopg.Error as exc:
        raise BookError(
            f"the server {shown(conninfo)} did not answer: {scrub(str(exc), conninfo)}"
        ) from None
    finally:
        conn.close()


def watch_params(now: datetime, plant: str | None) -> dict[str, Any]:
    return {"plant": plant, "now": now, "now_text": format_utc(now), "soon": now + DUE_SOON}


def lives_params(plant: str | None, part: str | None) -> dict[str, Any]:
    return {"plant": plant, "part": part, "reached": list(REACHED_REASONS)}


def watch(conninfo: str, now: datetime, plant: str | None = None) -> list[WatchRow]:
    """What is flagged, overdue or due within a week, per plant (all plants unless one)."""
    return [WatchRow(*row) for row in _run(conninfo, WATCH_SQL, watch_params(now, plant))]


def element_lives(
    conninfo: str, plant: str | None = None, part: str | None = None
) -> list[ElementLives]:
    """Every element part number's lives per plant and across plants, with their Weibull."""
    rows = _run(conninfo, LIVES_SQL, lives_params(plant, part))
    out: list[ElementLives] = []
    by_part: dict[str, list[tuple[float, bool]]] = {}
    for part_no, plant_code, lives_h, reached in rows:
        pairs = [(float(x), bool(r)) for x, r in zip(lives_h, reached, strict=True)]
        by_part.setdefault(part_no, []).extend(pairs)
        out.append(_fitted(part_no, plant_code, pairs))
    if plant is None:
        out.extend(_fitted(p, "*", pairs) for p, pairs in by_part.items())
    out.sort(key=lambda e: (e.part, e.plant == "*", e.plant))
    return out


def _fitted(part: str, plant: str, pairs: list[tuple[float, bool]]) -> ElementLives:
    failed = [x for x, reached in pairs if reached]
    censored = [x for x, reached in pairs if not reached]
    fit = fit_weibull(failed, censored)
    return ElementLives(
        part=part,
        plant=plant,
        lives=len(pairs),
        reached=len(failed),
        shape=fit.shape if fit else None,
        scale_h=fit.scale_h if fit else None,
        b10_h=fit.age_at_fraction_h(0.10) if fit else None,
        median_h=fit.age_at_fraction_h(0.50) if fit else None,
    )
