"""The app where a server is configured: the book's last sync in the title bar, and sync
offered in the command palette; without a reachable server one warning, nothing changed."""

from __future__ import annotations

from store.db.book import open_book


async def test_sync_shown_and_offered_only_where_a_server_is_configured(demo_app):
    app = demo_app()
    async with app.run_test(size=(80, 24)) as pilot:
        await pilot.pause()
        assert "synced" not in app.sub_title
        names = [c.title for c in app.get_system_commands(app.screen)]
        assert "Sync with the server" not in names
    before = demo_app.path.read_bytes()
    app = demo_app(server="postgresql://laptop@127.0.0.1:1/none?connect_timeout=2")
    async with app.run_test(size=(80, 24)) as pilot:
        await pilot.pause()
        assert "not synced yet" in app.sub_title
        names = [c.title for c in app.get_system_commands(app.screen)]
        assert "Sync with the server" in names
        worker = app.sync_now()
        await worker.wait()
        await pilot.pause()
        messages = [n.message for n in app._notifications]
        assert any("no server reached" in m or "plant code" in m for m in messages)
    with open_book(demo_app.path, create=False) as book:
        assert book.setting("server_synced_utc") is None
    assert demo_app.path.read_bytes() == before
