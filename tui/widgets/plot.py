"""The filter sheet's chart: ΔP against element age, with the limit, the bypass, the fitted
curve and the predicted interval. Each series has its own mark, so the legend works without
colour."""

from __future__ import annotations

import math

from textual.app import RenderResult
from textual_plotext import PlotextPlot

from store.base.prefs import Prefs
from store.base.units import from_bar
from store.sheets import FilterSheet
from tui.widgets.fmt import p_unit

MARK_GAUGE = "•"
MARK_REF = "◆"
MARK_LIMIT = "┄"
MARK_BYPASS = "═"
MARK_INTERVAL = "█"
MARK_LIKELY = "▼"
LEGEND = (
    f"{MARK_GAUGE} gauge ΔP   {MARK_REF} ΔP at reference   ⠤⠒ fitted curve   "
    f"{MARK_LIMIT} change limit   {MARK_BYPASS} bypass   "
    f"{MARK_INTERVAL}{MARK_LIKELY}{MARK_INTERVAL} predicted change (likely ▼)   │ now"
)

COLOURS = {
    True: {"gauge": "white", "ref": "cyan", "fit": "cyan", "limit": "orange", "bypass": "red"},
    False: {"gauge": "black", "ref": "blue", "fit": "blue", "limit": "orange", "bypass": "red"},
}


class FilterPlot(PlotextPlot):
    """Call `show(sheet, prefs)`; the chart redraws itself at any size."""

    DEFAULT_CSS = """
    FilterPlot { height: 12; min-height: 8; }
    """

    def __init__(self, **kwargs) -> None:  # noqa: ANN003 - widget options
        super().__init__(**kwargs)
        self.sheet: FilterSheet | None = None
        self.prefs = Prefs()
        self.drawn = 0  # counts `draw`s: what `render` built is used until the next one
        self.built: tuple[tuple[object, ...], RenderResult] | None = None

    def show(self, sheet: FilterSheet | None, prefs: Prefs) -> None:
        self.sheet, self.prefs = sheet, prefs
        self.draw()

    def on_resize(self) -> None:
        self.refresh()  # built again at the new size (`render`); the data are as drawn

    def render(self) -> RenderResult:
        """The chart as plotext builds it, once for each drawing, size and theme (the widget
        builds it again on every render: a screen laid out twice built it twice)."""
        key = (self.drawn, self.size, self.app.theme)
        if self.built is None or self.built[0] != key:
            self.built = (key, super().render())
        return self.built[1]

    def draw(self) -> None:
        self.drawn += 1
        plt = self.plt
        plt.clear_data()
        plt.clear_figure()
        sheet = self.sheet
        if sheet is None:
            self.refresh()
            return
        dark = bool(getattr(self.app.current_theme, "dark", True))
        colour = COLOURS[dark]
        unit = self.prefs.pressure
        st = sheet.status
        days = not sheet.uses_hours
        scale = 24.0 if days else 1.0

        def x(age_h: float) -> float:
            return age_h / scale

        def y(bar: float) -> float:
            return from_bar(bar, unit)

        ages = [p.age_h for p in st.history]
        end_h = max([st.element_age_h, *ages, 1.0])
        fc = st.forecast
        if fc is not None and fc.to_limit is not None and math.isfinite(fc.to_limit.latest_h):
            end_h = max(end_h, fc.to_limit.latest_h)
        if fc is not None and fc.curve:
            end_h = max(end_h, min(fc.curve[-1][0], 2.0 * end_h))
        end_h *= 1.05
        top = max(
            [
                v
                for v in (
                    st.bypass_bar,
                    st.limit_bar,
                    *(p.dp_bar for p in st.history),
                    *(p.dp_ref_bar for p in st.history),
                )
                if v is not None
            ]
            or [1.0]
        )
        if fc is not None and fc.curve:
            shown = [
                (a, d) for a, d in fc.curve if a <= end_h and math.isfinite(d) and d <= top * 1.2
            ]
            if shown:
                plt.plot(
                    [x(a) for a, _ in shown],
                    [y(d) for _, d in shown],
                    marker="braille",
                    color=colour["fit"],
                )
        for level, mark, key in (
            (st.limit_bar, MARK_LIMIT, "limit"),
            (st.bypass_bar, MARK_BYPASS, "bypass"),
        ):
            if level is not None:
                plt.plot([0, x(end_h)], [y(level), y(level)], marker=mark, color=colour[key])
        if fc is not None and fc.to_limit is not None and st.limit_bar is not None:
            iv = fc.to_limit
            hi = iv.latest_h if math.isfinite(iv.latest_h) else end_h
            plt.plot(
                [x(iv.earliest_h), x(min(hi, end_h))],
                [y(st.limit_bar)] * 2,
                marker=MARK_INTERVAL,
                color=colour["limit"],
            )
            if iv.likely_h <= end_h:
                plt.scatter([x(iv.likely_h)], [y(st.limit_bar)], marker=MARK_LIKELY)
        raw = [(p.age_h, p.dp_bar) for p in st.history if p.dp_bar is not None]
        ref = [(p.age_h, p.dp_ref_bar) for p in st.history if p.dp_ref_bar is not None]
        if raw:
            plt.scatter(
                [x(a) for a, _ in raw],
                [y(d) for _, d in raw],
                marker=MARK_GAUGE,
                color=colour["gauge"],
            )
        if ref:
            plt.scatter(
                [x(a) for a, _ in ref],
                [y(d) for _, d in ref],
                marker=MARK_REF,
                color=colour["ref"],
            )
        plt.vline(x(st.element_age_h))
        ticks = sorted(
            {v for v in (0.0, st.clean_bar, st.limit_bar, st.bypass_bar) if v is not None}
        )
        plt.yticks([y(t) for t in ticks], [f"{y(t):.3g}" for t in ticks])
        plt.ylim(0, y(top * 1.08))
        plt.xlim(0, x(end_h))
        age_word = "days" if days else "operating hours"
        plt.xlabel(f"element age ({age_word}) · ΔP in {p_unit(self.prefs)}")
        self.refresh()
