"""What a position's removed elements say about the element in service: the Weibull of
their lives (pooled with like positions' where it has too few of its own), their ΔP curves
as the forecast takes them, and this element's loading pace against them. The fitting maths
(numpy, scipy) load when first called."""

from __future__ import annotations

from collections.abc import Callable, Sequence
from typing import TYPE_CHECKING

from store.health.conditions import FilterContext
from store.health.elements import ElementSummary

if TYPE_CHECKING:
    from store.forecast import trend
    from store.forecast.life import WeibullFit

# (life_h, reached_limit) of like positions' removed elements, or what reads them: a position
# with lives enough of its own never asks. Reading every change of a big like group (a part
# number on two hundred units, five years of changes) was a sixth of a status's time.
LikeLives = Sequence[tuple[float, bool]] | Callable[[], Sequence[tuple[float, bool]]]


def life_fit(
    ctx: FilterContext, past: Sequence[ElementSummary], like: LikeLives
) -> tuple[WeibullFit | None, bool]:
    """Weibull of this position's element lives, pooled with like positions' if it has too
    few for a fit of its own (`like` read only then); and whether it was pooled."""
    from store.forecast.life import fit_weibull  # deferred: numpy/scipy load on first fit

    failed, censored = [], []
    for el in past:
        life = el.life_h()
        if life is None or life <= 0:
            continue
        (failed if el.reached_limit(ctx.position.limit_bar) else censored).append(life)
    fit = fit_weibull(failed, censored) if len(failed) >= 3 else None
    if fit is not None:
        return fit, False
    if callable(like):
        like = like()
    if like:
        pooled = fit_weibull(
            failed + [h for h, r in like if r], censored + [h for h, r in like if not r]
        )
        return pooled, pooled is not None
    return fit, False


def past_curves(ctx: FilterContext, past: Sequence[ElementSummary]) -> list[trend.PastElement]:
    from store.forecast import trend  # deferred: numpy/scipy load on first fit

    out = []
    for el in past:
        life = el.life_h()
        if life and life > 0 and el.ages_h:
            out.append(
                trend.PastElement(
                    ages_h=el.ages_h,
                    dp_ref_bar=el.dp_ref_bar,
                    life_h=life,
                    reached_limit=el.reached_limit(ctx.position.limit_bar),
                )
            )
    return out


def pace(
    ctx: FilterContext, past: Sequence[ElementSummary], forecast: trend.Forecast | None
) -> trend.Pace | None:
    """This element's pace against the earlier elements on the position that ran to the limit,
    from a forecast fitted to its own readings (not from lives alone)."""
    from store.forecast import trend  # deferred: numpy/scipy load on first fit

    if (
        forecast is None
        or forecast.to_limit is None
        or forecast.basis not in ("earlier-curves", "trend")
        or forecast.state not in ("ok", "check-now")
    ):
        return None
    lives = [
        life
        for el in past
        if (life := el.life_h()) is not None
        and life > 0
        and el.reached_limit(ctx.position.limit_bar)
    ]
    return trend.loading_pace(forecast.to_limit.likely_h, lives)
