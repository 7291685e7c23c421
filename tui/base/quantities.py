"""Quantities as text in the user's units, with their labels (shared by the app and the CLI).

Kept free of the fitting maths so that the command line starts quickly.
"""

from __future__ import annotations

from store.base.prefs import Prefs
from store.base.units import (
    from_bar,
    from_c,
    from_l,
    pressure_label,
    temperature_label,
    volume_label,
)


def p_unit(prefs: Prefs) -> str:
    return pressure_label(prefs.pressure)


def t_unit(prefs: Prefs) -> str:
    return temperature_label(prefs.temperature)


def v_unit(prefs: Prefs) -> str:
    return volume_label(prefs.volume)


def p_digits(prefs: Prefs) -> int:
    return 1 if prefs.pressure.lower() in ("psi", "kpa") else 2


def pressure(value_bar: float | None, prefs: Prefs, unit: bool = True) -> str:
    if value_bar is None:
        return "–"
    text = f"{from_bar(value_bar, prefs.pressure):.{p_digits(prefs)}f}"
    return f"{text} {p_unit(prefs)}" if unit else text


def temperature(value_c: float | None, prefs: Prefs, unit: bool = True) -> str:
    if value_c is None:
        return "–"
    text = f"{from_c(value_c, prefs.temperature):.0f}"
    return f"{text} {t_unit(prefs)}" if unit else text


def volume(value_l: float | None, prefs: Prefs, unit: bool = True) -> str:
    if value_l is None:
        return "–"
    text = f"{from_l(value_l, prefs.volume):.1f}"
    return f"{text} {v_unit(prefs)}" if unit else text
