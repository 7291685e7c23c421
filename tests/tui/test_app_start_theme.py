"""The laptop's theme is set before the stylesheet is first read (`SumpbookApp.start_theme`,
not through Textual's `theme` reactive, whose watcher has every stylesheet parsed twice more
before the first paint). What the technician sees must not depend on that: an app started
in a theme draws its watch list exactly as one started in another theme and switched to it
the way the preferences do (`change_prefs`, the reactive and its watcher)."""

from __future__ import annotations

import pytest

from tests.kit.plant import settle
from tui.screens.watch import WatchScreen

SIZE = (80, 24)


async def _shot(app, switch_to: str | None = None) -> tuple[str, list[str]]:
    """The watch list as drawn, and the app's own classes (what the theme sets: its name,
    dark or light mode)."""
    async with app.run_test(size=SIZE) as pilot:
        await settle(pilot, WatchScreen)
        if switch_to is not None:
            app.change_prefs(theme=switch_to)
            await settle(pilot, WatchScreen)
        await pilot.pause()
        return app.export_screenshot(title="theme"), sorted(app.classes)


@pytest.mark.parametrize(("started", "other"), [("light", "dark"), ("contrast", "dark"),
                                                ("dark", "light")])  # fmt: skip
async def test_a_theme_at_start_draws_as_the_same_theme_switched_to(demo_app, started, other):
    at_start = await _shot(demo_app(theme=started))
    switched = await _shot(demo_app(theme=other), switch_to=started)
    assert demo_app(theme=started).theme == f"sumpbook-{started}"
    assert at_start == switched
    assert f"-theme-sumpbook-{started}" in at_start[1]


async def test_the_check_sees_a_theme(demo_app):
    """Not blind: two themes draw differently."""
    light, dark = await _shot(demo_app(theme="light")), await _shot(demo_app(theme="dark"))
    assert light[0] != dark[0] and light[1] != dark[1]
