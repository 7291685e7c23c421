"""Command-palette commands from the book: 'Reading on P1-RF', 'Unit sheet P1', …"""

from __future__ import annotations

from collections.abc import Callable
from functools import partial

from textual.command import DiscoveryHit, Hit, Hits, Provider

from store.sheets import TagHit, tag_index

VERBS = {
    "filter": (
        ("Reading on", "reading"),
        ("Element change on", "change"),
        ("Filter sheet", "filter-sheet"),
    ),
    "breather": (("Breather swap on", "breather"), ("Unit sheet of", "breather-unit")),
    "unit": (
        ("Unit sheet", "unit-sheet"),
        ("Top-up on", "topup"),
        ("Sample on", "sample"),
        ("Note on", "note"),
    ),
}


class BookCommands(Provider):
    """One command per thing a technician can do to a tag in the register."""

    async def startup(self) -> None:
        try:
            self.hits: list[TagHit] = tag_index(self.app.book)  # type: ignore[attr-defined]
        except Exception:  # noqa: BLE001 - a palette must open even if the book cannot be read
            self.hits = []

    def commands(self) -> list[tuple[str, Callable[[], None], str]]:
        route = self.app.route_tag  # type: ignore[attr-defined]
        out = []
        for hit in self.hits:
            for verb, action in VERBS[hit.what]:
                out.append((f"{verb} {hit.tag}", partial(route, action, hit), hit.label))
        return out

    async def discover(self) -> Hits:
        for text, callback, help_text in self.commands()[:12]:
            yield DiscoveryHit(text, callback, help=help_text)

    async def search(self, query: str) -> Hits:
        matcher = self.matcher(query)
        for text, callback, help_text in self.commands():
            score = matcher.match(text)
            if score > 0:
                yield Hit(score, matcher.highlight(text), callback, text=text, help=help_text)
