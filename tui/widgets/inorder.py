"""Keys applied in the order they were typed, and fields read as they stood at a key.

Textual puts a printable key into an Input the moment the Input takes it from its queue, but
runs a key's binding (Backspace, Delete and the arrows of an Input, space on a tick box, a
screen's ctrl+s) only after the key has bubbled back up to the App. Keys that arrive together
(a fast typist, a scanner, a terminal sending a burst) were therefore applied out of order:
after a refused '1,250', Backspace×5 'abc' ctrl+s sent at once put 'abc' in first, then the
five Backspaces cut '1,250abc' to '1,2', then the save read 1.2 bar and saved it.

Two parts put that right:

- `InOrderKeys`: a field runs its own bindings when it takes the key from its queue, in
  line with the letters around it (and stops the key, so it is not run a second time).
- `read_at_key`: a save key is seen by a priority binding, at the App, in the order keys
  arrived; every key before it has been handed to some field's queue, none after it. A
  marker is queued behind those keys in each field, and each field is read when its marker
  comes up: the values as they stood at the save key, whatever is typed meanwhile.
"""

from __future__ import annotations

from collections.abc import Callable, Iterable
from typing import Any

from textual import events
from textual.widget import Widget


class InOrderKeys:
    """Mixin for a field (Input, Checkbox, Select): its own bindings run when it takes the
    key, not when the key comes back to the App. A field with parts of its own (a choice's
    list) does so only while it has the focus itself: a key on its way up from its list is
    the list's, and Textual runs the list's bindings for it as before."""

    async def _on_key(self, event: events.Key) -> None:
        widget: Any = self
        if widget.children and widget.screen.focused is not widget:
            await super()._on_key(event)  # type: ignore[misc]
            return
        # `_bindings` is what Textual's own binding lookup reads for this widget (its BINDINGS
        # merged with the app's keymap); priority bindings ran at the App already.
        for binding in widget._bindings.key_to_bindings.get(event.key, ()):
            if binding.priority:
                continue
            if await widget.app.run_action(binding.action, widget):
                event.stop()
                event.prevent_default()
                return
        await super()._on_key(event)  # type: ignore[misc]


def read_at_key(
    fields: Iterable[Widget],
    read: Callable[[Widget], Any],
    done: Callable[[dict[Widget, Any]], None],
) -> None:
    """Read each field once it has taken every key handed to it before now; then call
    `done` with {field: what was read}. Call it from a priority binding (the moment the key
    arrived) or a click; a field that no longer runs is read at once."""
    fields = list(fields)
    got: dict[Widget, Any] = {}

    def take(field: Widget) -> None:
        if field in got:
            return
        got[field] = read(field)
        if len(got) == len(fields):
            done(got)

    if not fields:
        done(got)
        return
    for field in fields:
        if not field.call_later(take, field):
            take(field)
