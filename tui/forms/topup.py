"""Top-up: how much oil went in, which oil, and how it was filtered on the way."""

from __future__ import annotations

from store.ledger.register import Fluid, Unit, find, list_all
from tui.forms.base import EntryForm
from tui.forms.validators import RangeValidator, VolumeValidator
from tui.widgets import fmt
from tui.widgets.caution import TOPUP_CAUTION_TEXT
from tui.widgets.field import Spec

HOW = [("through a filter cart", "filtered"), ("unfiltered (from the drum)", "unfiltered")]


class TopUpForm(EntryForm):
    kind = "topup"
    heading = "Top-up"
    caution_text = TOPUP_CAUTION_TEXT

    def specs(self) -> list[Spec]:
        book, prefs = self.sb.book, self.sb.prefs
        unit = find(book, Unit, self.target) if self.target else None
        if unit is not None:
            self.heading = f"Top-up on {unit.tag}" + (f" ({unit.name})" if unit.name else "")
        self.first = "volume" if unit else "unit"
        fluids = list_all(book, Fluid)
        return [
            self.tag_spec("unit", Unit, "unit", unit.tag if unit else self.target),
            Spec(
                "volume",
                f"Volume {fmt.v_unit(prefs)}",
                "",
                [VolumeValidator(prefs.volume)],
                required=True,
            ),
            Spec(
                "fluid",
                "Fluid",
                (unit.fluid or "") if unit else "",
                options=[(f"{f.tag} {f.name}".strip(), f.tag) for f in fluids],
                hint="the unit's own fluid",
            ),
            Spec("how", "Went in", "", options=HOW, required=True),
            Spec(
                "filtered",
                "Cart rating µm",
                "",
                [RangeValidator("filtered_um")],
                hint="finest stage of the cart",
            ),
            Spec("hours", "Hour meter h", "", [RangeValidator("hours")]),
            *self.common_specs(),
        ]
