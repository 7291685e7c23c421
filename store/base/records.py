"""`frozen_record`: a frozen dataclass made with less work at import.

Python 3.11's `dataclass` compiles each method it adds from source text, one `exec` per
method: for a frozen class `__init__`, `__repr__`, `__eq__`, `__hash__`, `__setattr__` and
`__delattr__`. Sixty of them on the command line's start path cost about a third of its
imports. Here `dataclass` makes `__init__` as ever, and `__repr__`, `__eq__` and `__hash__`
are shared functions over the class's field names, answering exactly as the generated ones do
(the same text, the same comparison of field tuples, the same hash of the same tuple;
`tests/store/test_records.py` compares them with `dataclass`'s own).

The frozen guards (`__setattr__`, `__delattr__`) are made as closures over the class and its
field names instead of from source text: the same test, the same error and message, the same
hand-on to the base class (about a ninth of the command line's imports, 10 ms). That takes
`dataclass`'s private maker of them, swapped for the class's making only, on the Python it
is known on (`GUARDS_AS_KNOWN`); elsewhere `dataclass` makes them itself.
"""

from __future__ import annotations

import dataclasses
import reprlib
import sys
import threading
from collections.abc import Callable
from operator import attrgetter
from typing import Any, TypeVar, dataclass_transform

T = TypeVar("T")
_OWN = ("__repr__", "__eq__", "__hash__")


def _getter(names: tuple[str, ...]) -> Callable[[Any], tuple[Any, ...]]:
    """The tuple of these attributes of an object (attrgetter gives a bare value for one)."""
    if len(names) > 1:
        return attrgetter(*names)
    if names:
        name = names[0]
        return lambda obj: (getattr(obj, name),)
    return lambda obj: ()


@dataclass_transform(
    frozen_default=True, kw_only_default=False, field_specifiers=(dataclasses.field,)
)
def frozen_record(cls: type[T] | None = None, /, *, kw_only: bool = False) -> Any:
    """`@dataclass(frozen=True)` (or with `kw_only=True`), the same class to every reader: its
    fields, `__init__`, `__repr__`, equality, hash, `__match_args__`, `__dataclass_params__`,
    frozen-ness. A class that writes its own `__repr__`, `__eq__` or `__hash__` is left to
    `dataclass` as it is."""

    def wrap(cls: type[T]) -> type[T]:
        if any(name in cls.__dict__ for name in _OWN):
            return dataclasses.dataclass(frozen=True, kw_only=kw_only)(cls)
        with _ClosureGuards():
            made = dataclasses.dataclass(frozen=True, kw_only=kw_only, repr=False, eq=False)(cls)
        _add_methods(made)
        return made

    return wrap if cls is None else wrap(cls)


def _guards(cls: type, fields: list[Any], globals: dict[str, Any]) -> tuple[Callable, Callable]:
    """What `dataclasses._frozen_get_del_attr` makes for a frozen class (Python 3.11), as
    closures: refuse to set or delete a field (or anything on the class's own instances)."""
    names = frozenset(f.name for f in fields)
    refused = dataclasses.FrozenInstanceError

    def __setattr__(self: Any, name: str, value: Any) -> None:
        if type(self) is cls or name in names:
            raise refused(f"cannot assign to field {name!r}")
        super(cls, self).__setattr__(name, value)

    def __delattr__(self: Any, name: str) -> None:
        if type(self) is cls or name in names:
            raise refused(f"cannot delete field {name!r}")
        super(cls, self).__delattr__(name)

    return __setattr__, __delattr__


_MAKER = getattr(dataclasses, "_frozen_get_del_attr", None)
# Where dataclass's maker of the guards is the one `_guards` stands in for (its arguments as
# on 3.11); 3.12 on pass it other ones, and there dataclass makes the guards itself.
GUARDS_AS_KNOWN = (
    sys.version_info[:2] == (3, 11)
    and _MAKER is not None
    and _MAKER.__code__.co_varnames[:3] == ("cls", "fields", "globals")
)
_SWAP = threading.RLock()  # one class at a time swaps the maker (a worker may import too)


class _ClosureGuards:
    """While a class is made: dataclass's maker of the frozen guards is `_guards` (where it is
    as known), put back after, whatever happens."""

    def __enter__(self) -> None:
        if GUARDS_AS_KNOWN:
            _SWAP.acquire()
            dataclasses._frozen_get_del_attr = _guards  # type: ignore[attr-defined]

    def __exit__(self, *exc: object) -> None:
        if GUARDS_AS_KNOWN:
            dataclasses._frozen_get_del_attr = _MAKER  # type: ignore[attr-defined]
            _SWAP.release()


def _add_methods(cls: type) -> None:
    every = dataclasses.fields(cls)
    shown = tuple(f.name for f in every if f.repr)
    compared = _getter(tuple(f.name for f in every if f.compare))
    hashed = _getter(tuple(f.name for f in every if (f.compare if f.hash is None else f.hash)))

    @reprlib.recursive_repr()
    def __repr__(self: Any) -> str:
        return (
            self.__class__.__qualname__
            + "("
            + ", ".join([f"{name}={getattr(self, name)!r}" for name in shown])
            + ")"
        )

    def __eq__(self: Any, other: Any) -> Any:
        if other.__class__ is self.__class__:
            return compared(self) == compared(other)
        return NotImplemented

    def __hash__(self: Any) -> int:
        return hash(hashed(self))

    for fn in (__repr__, __eq__, __hash__):
        fn.__qualname__ = f"{cls.__qualname__}.{fn.__name__}"
        setattr(cls, fn.__name__, fn)
    # The parameters as `dataclass` would have recorded them: every one as given, repr and eq
    # on (3.12 and later record more of them than 3.11: take whatever the class holds).
    params = cls.__dataclass_params__  # type: ignore[attr-defined]
    given = {name: getattr(params, name) for name in type(params).__slots__}
    cls.__dataclass_params__ = type(params)(**{**given, "repr": True, "eq": True})  # type: ignore[attr-defined]


def filled_record(cls: type[T], values: dict[str, Any]) -> T:
    """A `frozen_record` of `cls` holding `values` (every field, by name, as its __init__
    would set them), made without the frozen guard's call per field: readers that make
    thousands of small records at once (a watch list's dates, clocks and summaries) use it.
    Only for a class without `__post_init__`, slots or defaults to fill in; the tests of
    each reader hold what it makes equal to the constructor's object."""
    record = object.__new__(cls)
    record.__dict__.update(values)
    return record
