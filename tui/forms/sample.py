"""Sample result: particle counts (or the ISO 4406 code) and water content."""

from __future__ import annotations

from store.base.units import read_number
from store.ledger.register import Unit, find
from tui.forms.base import EntryForm
from tui.forms.validators import CodeValidator, RangeValidator
from tui.widgets.field import Spec


def _num(text: str) -> float | None:
    return read_number(text) if text else None


class SampleForm(EntryForm):
    kind = "sample"
    heading = "Fluid sample result"

    def specs(self) -> list[Spec]:
        book = self.sb.book
        unit = find(book, Unit, self.target) if self.target else None
        if unit is not None:
            target = f", target {unit.target_code}" if unit.target_code else ""
            self.heading = f"Sample result for {unit.tag}{target}"
        self.first = "code" if unit else "unit"
        count = RangeValidator("c4_per_ml")
        return [
            self.tag_spec("unit", Unit, "unit", unit.tag if unit else self.target),
            Spec("code", "ISO 4406 code", "", [CodeValidator()], hint="e.g. 18/16/13"),
            Spec("c4", "≥4 µm(c) /mL", "", [count], hint="or give the counts"),
            Spec("c6", "≥6 µm(c) /mL", "", [count]),
            Spec("c14", "≥14 µm(c) /mL", "", [count]),
            Spec("water", "Water ppm", "", [RangeValidator("water_ppm")]),
            *self.common_specs(),
        ]
