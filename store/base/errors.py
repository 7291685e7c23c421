"""Errors a person can act on: each message is one plain line."""


class BookError(ValueError):
    """A user-facing problem: message is one plain line."""


class NotALogbook(BookError):
    """The file is not a sumpbook logbook, or it is damaged."""


class TooNew(BookError):
    """The logbook was written by a newer sumpbook; it is left untouched."""
