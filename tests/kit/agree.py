"""The list read from the kept rows against the list computed from the entries alone: one
comparison for the tests that hold them together."""

from __future__ import annotations

from store.derived.statuscache import _encode
from store.health import status_json
from store.health.status_model import FilterStatus, Watch


def exact(status: FilterStatus) -> tuple:
    """A filter's status whole and unrounded: what a kept row holds (its `to_row`) and what
    is worked out at the clock when it is read."""
    return (
        _encode(status), status.state, status.flags, status.notes, status.due,
        status.bypass_due, status.element_age_h,
    )  # fmt: skip


def same_list(kept: Watch, alone: Watch) -> None:
    """The same `status --json` answer, and each filter's status unrounded."""
    assert status_json.to_json(kept) == status_json.to_json(alone)
    assert [exact(f) for f in kept.filters] == [exact(f) for f in alone.filters]
