"""The safety blocks: before an element change or a breather swap (acknowledged with a tick),
and on a top-up (shown, no tick)."""

from __future__ import annotations

from textual.widgets import Static

CAUTION_TEXT = (
    "SAFETY FIRST (this app advises; the person on site decides):\n"
    "• Isolate and lock out; bleed off pressure; discharge accumulators.\n"
    "• Let hot oil cool. Wear eye protection and oil-proof gloves.\n"
    "• Never feel for leaks by hand: injected oil needs emergency care.\n"
    "• Catch spilt oil; dispose of it and the old element properly.\n"
    "• The maker's manual, site procedures and local rules come first."
)

TOPUP_CAUTION_TEXT = (  # each line within an 80-column form
    "TOPPING UP (the maker's manual and site rules come first):\n"
    "• Vent a pressurised reservoir to zero before its cap comes off.\n"
    "• Hot oil and tank walls burn: eye protection, oil-proof gloves.\n"
    "• Fill through a filter, from clean closed cans of the unit's fluid."
)


class Caution(Static):
    DEFAULT_CSS = """
    Caution {
        border: heavy $warning;
        padding: 0 1;
        margin: 0;
        height: auto;
    }
    """

    def __init__(self, text: str = CAUTION_TEXT) -> None:
        super().__init__(text, markup=False, id="caution")
