"""Like positions' lives are read only for a position with too few lives of its own for a
Weibull fit (store.health.earlier.life_fit): on a big plant a part number shared by many
positions has thousands of changes, and reading them for a position that never pools was a
sixth of a status's time on the five-year benchmark book. The statuses stay what reading
them first gives."""

from __future__ import annotations

from datetime import UTC, datetime
from pathlib import Path

from store.db.book import open_book
from store.derived import statuscache
from store.health.conditions import contexts
from tests.benchmarks import make_big_logbook

CLOCK = datetime(2026, 6, 1, 12, 0, tzinfo=UTC)


def test_like_lives_are_read_only_where_a_position_is_short_of_its_own(tmp_path: Path, monkeypatch):
    path = tmp_path / "plant.db"
    make_big_logbook.build(3, 1.5, path, seed=4, end=CLOCK)
    real = statuscache.like_lives
    asked: list[str] = []

    def counted(book, ctx, until):  # noqa: ANN001, ANN202
        asked.append(ctx.position.tag)
        return real(book, ctx, until)

    with open_book(path) as book:
        ctxs = contexts(book)
        first = {
            tag: statuscache.live_status(book, ctx, like=real(book, ctx, None))[0]
            for tag, ctx in ctxs.items()
        }
        monkeypatch.setattr(statuscache, "like_lives", counted)
        lazy = {tag: statuscache.live_status(book, ctx)[0] for tag, ctx in ctxs.items()}
        sheets = {tag: statuscache.filter_view(book, tag)[0] for tag in ctxs}
    assert lazy == first
    assert {tag: s.life for tag, s in sheets.items()} == {t: s.life for t, s in first.items()}
    own = {tag for tag, s in first.items() if s.life is not None and not s.life.pooled}
    pooled = {tag for tag, s in first.items() if s.life is not None and s.life.pooled}
    # The toy plant has both: positions with three or more lives that reached the limit, and
    # positions (the slow ones) that lean on their like positions'.
    assert own and pooled
    assert not own & set(asked)
    assert pooled <= set(asked)
