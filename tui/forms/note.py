"""Note: free text, on a unit or on the plant as a whole."""

from __future__ import annotations

from typing import Any

from store.ledger.entries import Entry, Note
from store.ledger.register import Unit, find
from tui.forms.base import EntryForm
from tui.widgets.field import Spec


class NoteForm(EntryForm):
    heading = "Note"

    def specs(self) -> list[Spec]:
        book = self.sb.book
        unit = find(book, Unit, self.target) if self.target else None
        if unit is not None:
            self.heading = f"Note on {unit.tag}"
        self.first = "note"
        specs = [
            self.tag_spec(
                "unit",
                Unit,
                "unit",
                unit.tag if unit else "",
                required=False,
                hint="blank: the whole plant",
            ),
            *self.common_specs(),
        ]
        specs[-1].required = True  # the note itself
        specs[-1].hint = "what you saw or did"
        return specs

    def build(self, v: dict[str, Any]) -> Entry:
        return Note(unit=v["unit"] or None, at=self.when(v["time"]), by=v["by"], note=v["note"])
