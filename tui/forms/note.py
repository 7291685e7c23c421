"""Note: free text, on a unit or on the plant as a whole."""

from __future__ import annotations

from store.ledger.register import Unit, find
from tui.forms.base import EntryForm
from tui.widgets.field import Spec


class NoteForm(EntryForm):
    kind = "note"
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
