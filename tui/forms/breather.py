"""Breather swap: why, and how spent the old cartridge was."""

from __future__ import annotations

from store.ledger.journal import BREATHER_REASONS
from store.ledger.register import Breather, find
from tui.forms.base import EntryForm
from tui.widgets.field import Spec

REASON_WORDS = {
    "interval": "planned interval",
    "spent": "desiccant spent",
    "damage": "damaged",
    "other": "other (say in note)",
}


class BreatherForm(EntryForm):
    kind = "breather"
    heading = "Breather swap"
    caution = True

    def specs(self) -> list[Spec]:
        book = self.sb.book
        breather = find(book, Breather, self.target) if self.target else None
        if breather is not None:
            self.heading = (
                f"Breather swap on {breather.tag} ({breather.kind}, unit {breather.unit})"
            )
        self.first = "reason" if self.target else "breather"
        return [
            self.tag_spec(
                "breather", Breather, "breather", breather.tag if breather else self.target
            ),
            Spec(
                "reason",
                "Why",
                self.preset.get("reason", "interval"),
                options=[(REASON_WORDS[r], r) for r in BREATHER_REASONS],
                required=True,
            ),
            Spec("condition", "Old cartridge", "", hint="e.g. 2/3 spent, 80 %, fresh"),
            *self.common_specs(),
        ]
