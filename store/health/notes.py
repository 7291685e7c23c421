"""The notes of a filter's status, by code: a status (and a kept row) holds each note as its
code and parameters (`Note`), and the words are made from these when it is read, so a kept
row never holds English to patch. Rewording one changes the kept rows' format
(store/derived/statuscache.py hashes NOTE_TEXT): old rows are computed again."""

from __future__ import annotations

from dataclasses import field
from typing import Any

from store.base.records import frozen_record

NOTE_TEXT = {
    "no-limits": "set the change limit and bypass ΔP to get a due date",
    "no-forecast": "no forecast: {error}",
    "forecast": "{text}",  # the forecast's own sentence (store/forecast/trend.py) ...
    "check-now": (  # ... followed by this once the element is past its likely age
        " The limit was probably reached after the last reading (at {at_h:.0f} h): read the gauge."
    ),
    "fast-loading": (
        "loading about {ratio:.1f}× the pace of the last {n} elements: something "
        "changed (dirt getting in, a wrong or faulty element, wear upstream): take a fluid "
        "sample, check the breather and recent top-ups"
    ),
    "service-life": (
        "planned from earlier element lives: 10 % reach the limit by {b10_h:.0f} h of service"
    ),
    "gauge-at-bypass": "the gauge read at or over the bypass setting: unfiltered oil passed",
    "dp-drop": "{reason}; {advice}",  # the words of store/forecast/anomaly.py's finding
    "step-up": "{reason}; {advice}",
    "no-cold-start": "cold start not computed: {error}",
    "cold-start-bypass": (
        "a start at {start_c:g} °C would give {dp_bar:.2f} bar and open the bypass "
        "(below {below_c:.0f} °C)"
    ),
    "new-element-high": (
        "a new element already at {percent:.0f} % of its change limit after "
        "{age_h:.0f} h: check it is the right element, seated and undamaged, that the clean "
        "ΔP setting is right, and where the dirt comes from (take a fluid sample)"
    ),
    "hot": "fluid at {temp_c:.0f} °C, over the unit's {limit_c:g} °C limit",
}


@frozen_record
class Note:
    """One note of a filter's status: a code of NOTE_TEXT and what fills its blanks. A
    "forecast" note with `at_h` gets the check-now words when the status is check-now."""

    code: str
    params: dict[str, Any] = field(default_factory=dict)

    def text(self, state: str) -> str:
        words = NOTE_TEXT[self.code].format(**self.params)
        if self.code == "forecast" and state == "check-now" and "at_h" in self.params:
            words += NOTE_TEXT["check-now"].format(**self.params)
        return words

    def to_row(self) -> list[Any]:
        return [self.code, self.params] if self.params else [self.code]

    @classmethod
    def from_row(cls, row: list[Any]) -> Note:
        return cls(row[0], row[1] if len(row) > 1 else {})
