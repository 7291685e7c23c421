"""The kept rows' keys are digests the book already holds: whatever module the digest is taken
from, it must be the standard library's BLAKE2b of the value's repr (hashlib, the reference),
or every kept row of every book would stop holding at the upgrade."""

from __future__ import annotations

import hashlib

import pytest

from store.derived import statuscache


@pytest.mark.parametrize(
    "value",
    [
        ("PR-3-P1", "PR-3", 5.0, None, "β200 ≥ 10 µm"),
        [9, "2026-06-01T04:00:00Z", 0.1 + 0.2, float("inf")],
        (("U1", None), [], {"a": 1}),
    ],
)
def test_the_digest_is_hashlib_s_blake2b_of_the_repr(value):
    expected = hashlib.blake2b(repr(value).encode(), digest_size=8).hexdigest()  # hashlib
    assert statuscache._digest(value) == expected
