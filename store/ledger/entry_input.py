"""An entry from what a person typed: the one reading of an entry's fields for every door a
person types at (the entry forms, the round, `sumpbook log`).

Each field comes in as its text (or None / "" when not given) in the user's units; numbers
are read by `store.base.units.read_number` ('12,5' is 12.5, '1,250' is asked about) and
quantities by the unit parsers of `store.base.units`, and converted to the stored units here.
Whether the values are in range, the tags known and the kind's needs met is
`journal.validate`'s job, on the way into the book, as for every other door.

A field's text that cannot be read raises `FieldError` naming the field: the forms put the
cursor there, the command line names its option (`--flow: ...`).
"""

from __future__ import annotations

from collections.abc import Mapping
from datetime import datetime
from typing import Any

from store.base.errors import BookError
from store.base.prefs import Prefs
from store.base.units import (
    parse_pressure_bar,
    parse_temperature_c,
    parse_volume_l,
    read_number,
)
from store.ledger import journal
from store.ledger.entries import (
    BreatherSwap,
    ElementChange,
    Entry,
    Note,
    Reading,
    Sample,
    TopUp,
    Void,
)


class FieldError(BookError):
    """A typed field that cannot be read, or a combination refused, naming the field."""

    def __init__(self, message: str, field: str) -> None:
        super().__init__(message)
        self.field = field


# What each kind is typed as: its field names (the forms' fields, the command's options).
FIELDS: dict[str, tuple[str, ...]] = {
    "reading": ("filter", "dp", "indicator", "temp", "flow", "hours"),
    "change": ("filter", "reason", "condition", "batch", "hours"),
    "topup": ("unit", "volume", "fluid", "how", "filtered", "hours"),
    "breather": ("breather", "reason", "condition"),
    "sample": ("unit", "code", "counts", "c4", "c6", "c14", "water"),
    "note": ("unit",),
    "void": ("entry", "reason"),
}
INDICATOR_WORDS = {"clean": "clean", "dirty": "dirty", "bypass": "bypass", "in bypass": "bypass"}


def _text(typed: Mapping[str, Any], name: str) -> str:
    value = typed.get(name)
    return "" if value is None else str(value).strip()


def _read(typed: Mapping[str, Any], name: str, parse: Any) -> Any:
    """The field read by `parse`, None when not given; FieldError naming it otherwise."""
    text = _text(typed, name)
    if not text:
        return None
    try:
        return parse(text)
    except BookError as exc:  # the number's own words ('... reads two ways', 'not a number')
        raise FieldError(str(exc), name) from exc


def _counts(typed: Mapping[str, Any]) -> tuple[Any, Any, Any]:
    """≥4/≥6/≥14 µm(c) counts per mL: three fields, or one 'a/b/c' ('-' for a missing one)."""
    text = _text(typed, "counts")
    if not text:
        return tuple(_read(typed, n, read_number) for n in ("c4", "c6", "c14"))  # type: ignore[return-value]
    parts = [p.strip() for p in text.split("/")]
    if len(parts) != 3:
        raise FieldError("counts are ≥4/≥6/≥14 per mL, e.g. 2000/500/60 (or -/500/60)", "counts")
    split = {n: ("" if p == "-" else p) for n, p in zip(("c4", "c6", "c14"), parts, strict=True)}
    try:
        return tuple(_read(split, n, read_number) for n in ("c4", "c6", "c14"))  # type: ignore[return-value]
    except FieldError as exc:
        raise FieldError(str(exc), "counts") from exc


def build(
    kind: str,
    typed: Mapping[str, Any],
    units: Prefs,
    *,
    at: datetime | None = None,
    by: str = "",
    note: str = "",
) -> Entry:
    """The entry of `kind` from its typed fields (see FIELDS), in `units` (the laptop's
    pressure, temperature and volume units; a value may carry its own: '18 psi')."""
    common: dict[str, Any] = {"at": at, "by": by, "note": note or ""}
    hours = _read(typed, "hours", read_number)
    if kind == "reading":
        dp = _read(typed, "dp", lambda t: parse_pressure_bar(t, units.pressure))
        word = _text(typed, "indicator").lower()
        if word and word not in INDICATOR_WORDS:
            raise FieldError("the indicator reads clean, dirty or bypass", "indicator")
        if dp is None and not word:
            raise FieldError("give the ΔP, or the indicator's state", "dp")
        return Reading(
            filter=_text(typed, "filter"),
            dp_bar=dp,
            indicator=INDICATOR_WORDS[word] if word else None,
            temp_c=_read(typed, "temp", lambda t: parse_temperature_c(t, units.temperature)),
            flow_lpm=_read(typed, "flow", read_number),
            hours=hours,
            **common,
        )
    if kind == "change":
        reason = _text(typed, "reason")
        if not reason:  # no default: it decides how the life counts in the service-life figures
            raise FieldError("say why the element came out", "reason")
        return ElementChange(
            filter=_text(typed, "filter"),
            reason=reason,
            condition=_text(typed, "condition"),
            batch=_text(typed, "batch"),
            hours=hours,
            **common,
        )
    if kind == "topup":
        volume = _read(typed, "volume", lambda t: parse_volume_l(t, units.volume))
        if volume is None:
            raise FieldError("give the volume that went in", "volume")
        return TopUp(
            unit=_text(typed, "unit"),
            volume_l=volume,
            fluid=_text(typed, "fluid") or None,
            filtered_um=_filtration(typed),
            hours=hours,
            **common,
        )
    if kind == "breather":
        return BreatherSwap(
            breather=_text(typed, "breather"),
            reason=_text(typed, "reason") or "interval",
            condition=_text(typed, "condition"),
            **common,
        )
    if kind == "sample":
        c4, c6, c14 = _counts(typed)
        return Sample(
            unit=_text(typed, "unit"),
            code=_text(typed, "code") or None,
            c4_per_ml=c4,
            c6_per_ml=c6,
            c14_per_ml=c14,
            water_ppm=_read(typed, "water", read_number),
            **common,
        )
    if kind == "note":
        if not common["note"].strip():
            raise FieldError("the note is empty", "note")
        return Note(unit=_text(typed, "unit") or None, **common)
    if kind == "void":
        reason = _text(typed, "reason")
        if not reason:
            raise FieldError("say why it is void", "reason")
        return Void(voids=_text(typed, "entry"), **{**common, "note": reason})
    raise BookError(f"unknown entry kind '{kind}'")


def _filtration(typed: Mapping[str, Any]) -> float | None:
    """A top-up's cart rating in µm, None when it went in unfiltered (`how`: 'filtered' /
    'unfiltered'; not given, a rating says filtered), by `journal.topup_filtration`'s rule."""
    rating = _read(typed, "filtered", read_number)
    unfiltered = _text(typed, "how").lower() == "unfiltered"
    try:
        return journal.topup_filtration(unfiltered, rating)
    except BookError as exc:
        raise FieldError(str(exc), "how" if rating is not None else "filtered") from exc
