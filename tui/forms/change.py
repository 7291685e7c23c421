"""Element change: why it came out, how it looked, what went in."""

from __future__ import annotations

from store.ledger.journal import CHANGE_REASONS
from store.ledger.register import FilterPosition, find
from store.sheets import filter_status_of, likely_change_reason
from tui.forms.base import EntryForm
from tui.forms.validators import RangeValidator
from tui.widgets.field import Spec

REASON_WORDS = {
    "limit": "ΔP at change limit",
    "indicator": "indicator tripped",
    "interval": "planned interval",
    "bypass": "was in bypass",
    "damage": "damaged / leaking",
    "other": "other (say in note)",
}


class ChangeForm(EntryForm):
    kind = "change"
    heading = "Element change"
    caution = True

    def specs(self) -> list[Spec]:
        book = self.sb.book
        position = find(book, FilterPosition, self.target) if self.target else None
        if position is not None:
            self.heading = f"Element change on {position.tag} ({position.element or 'element'})"
        # Start in a text field: a menu first swallowed the letters typed into it.
        self.first = "condition" if position is not None else "filter"
        reason = likely_change_reason(filter_status_of(book, position.tag)) if position else ""
        return [
            self.tag_spec(
                "filter", FilterPosition, "filter", position.tag if position else self.target
            ),
            Spec(
                "reason",
                "Why",
                self.preset.get("reason", reason),
                options=[(REASON_WORDS[r], r) for r in CHANGE_REASONS],
                required=True,
            ),
            Spec("condition", "Old element", "", hint="as found: caked, torn, metal…"),
            Spec("batch", "New batch", "", hint="batch or lot of the new one"),
            Spec("hours", "Hour meter h", "", [RangeValidator("hours")]),
            *self.common_specs(),
        ]
