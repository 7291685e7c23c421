"""`frozen_record` answers as `dataclass(frozen=True)` does: each class below is made twice,
once by each, and every reader of a record is asked the same of both (the expected answers
are `dataclass`'s own, Python 3.11's standard library, run beside it)."""

from __future__ import annotations

import dataclasses
from dataclasses import FrozenInstanceError, dataclass, field
from typing import Any, ClassVar

import pytest

from store.base import records
from store.base.records import frozen_record


def twins(kw_only: bool = False) -> list[tuple[type, type]]:
    """Pairs of the same class body, made by dataclass and by frozen_record."""
    pairs = []
    for body in _BODIES:
        plain = dataclass(frozen=True, kw_only=kw_only)(body())
        lean = frozen_record(kw_only=kw_only)(body())
        pairs.append((plain, lean))
    return pairs


def _many() -> type:
    class Many:
        kind: ClassVar[str] = "x"
        a: int
        b: str = "b"
        c: float | None = None
        d: list[int] = field(default_factory=list, compare=False)
        e: Any = field(default=None, repr=False)
        f: int = field(default=0, hash=False)
        g: int = field(default=0, compare=False, hash=True)

    return Many


def _one() -> type:
    class One:
        a: float

    return One


def _none() -> type:
    class Nothing:
        pass

    return Nothing


_BODIES = [_many, _one, _none]
_ARGS = {"Many": [{"a": 1}, {"a": 1, "b": "z", "c": 2.5, "e": "hidden", "f": 3, "g": 4}],
         "One": [{"a": 1.5}, {"a": float("nan")}],
         "Nothing": [{}]}  # fmt: skip


def made(cls: type, args: dict[str, Any]) -> Any:
    return cls(**args)


@pytest.mark.parametrize("kw_only", [False, True])
def test_repr_eq_hash_fields_and_params_as_dataclass(kw_only):
    for plain, lean in twins(kw_only):
        assert [f.name for f in dataclasses.fields(lean)] == [
            f.name for f in dataclasses.fields(plain)
        ]
        assert repr(lean.__dataclass_params__) == repr(plain.__dataclass_params__)
        assert lean.__match_args__ == plain.__match_args__
        assert lean.__doc__ == plain.__doc__
        cases = _ARGS[plain.__name__]
        for args in cases:
            p, q = made(plain, args), made(lean, args)
            assert repr(q) == repr(p)
            assert hash(q) == hash(p)
            assert (q == made(lean, args)) == (p == made(plain, args))  # nan: not equal
            assert q != p and p != q  # another class: never equal
            assert (q == 1) is (p == 1) is False
        for x in cases:  # equality and hash between different values follow dataclass
            for y in cases:
                p1, p2 = made(plain, x), made(plain, y)
                q1, q2 = made(lean, x), made(lean, y)
                assert (q1 == q2) == (p1 == p2)
                assert (q1 != q2) == (p1 != p2)
                assert (hash(q1) == hash(q2)) == (hash(p1) == hash(p2))


def test_fields_left_out_of_equality_and_hash_as_declared():
    _, lean = twins()[0]
    one, two = lean(a=1, d=[1]), lean(a=1, d=[2])
    assert one == two  # d is compare=False
    assert hash(lean(a=1, f=1)) == hash(lean(a=1, f=2))  # f is hash=False
    assert hash(lean(a=1, g=1)) != hash(lean(a=1, g=2))  # g is hash=True (compare=False)
    assert "hidden" not in repr(lean(a=1, e="hidden"))


def test_frozen_and_replace_as_dataclass():
    _, lean = twins()[0]
    rec = lean(a=1)
    with pytest.raises(FrozenInstanceError):
        rec.a = 2  # type: ignore[misc]
    with pytest.raises(FrozenInstanceError):
        del rec.a  # type: ignore[misc]
    changed = dataclasses.replace(rec, b="y")
    assert changed.b == "y" and changed == lean(a=1, b="y") and type(changed) is lean
    assert dataclasses.asdict(rec)["a"] == 1


def test_a_subclass_compares_its_own_fields():
    @frozen_record(kw_only=True)
    class Base:
        a: int = 0

    @frozen_record(kw_only=True)
    class Child(Base):
        b: int = 0

    @dataclass(frozen=True, kw_only=True)
    class PlainBase:
        a: int = 0

    @dataclass(frozen=True, kw_only=True)
    class PlainChild(PlainBase):
        b: int = 0

    assert (Child(a=1, b=1) == Child(a=1, b=2)) is (PlainChild(a=1, b=1) == PlainChild(a=1, b=2))
    assert Child(a=1, b=1) != Base(a=1)
    assert (
        repr(Child(a=1, b=2)) == "test_a_subclass_compares_its_own_fields.<locals>.Child(a=1, b=2)"
    )
    assert repr(PlainChild(a=1, b=2)).endswith("PlainChild(a=1, b=2)")
    assert hash(Child(a=1, b=2)) == hash(PlainChild(a=1, b=2))


def test_a_record_inside_itself_is_shown_as_dataclass_shows_it():
    @frozen_record
    class Box:
        items: list[Any]

    @dataclass(frozen=True)
    class PlainBox:
        items: list[Any]

    lean, plain = Box([]), PlainBox([])
    lean.items.append(lean)
    plain.items.append(plain)
    assert (
        repr(lean)
        == repr(plain).replace("PlainBox", "Box")
        == ("test_a_record_inside_itself_is_shown_as_dataclass_shows_it.<locals>.Box(items=[...])")
    )


def test_a_class_with_its_own_methods_is_left_to_dataclass():
    @frozen_record
    class Own:
        a: int

        def __repr__(self) -> str:
            return "own"

    assert repr(Own(1)) == "own"
    assert Own(1) == Own(1) and hash(Own(1)) == hash(Own(1))


def _refusal(action) -> tuple[type, str]:
    try:
        action()
    except Exception as exc:  # what is refused, and how it is said
        return type(exc), str(exc)
    return type(None), ""


def test_the_frozen_guards_refuse_and_hand_on_as_dataclass_s():
    # frozen_record makes __setattr__ and __delattr__ as closures (on 3.11); each must refuse
    # what dataclass's own refuse, with the same error and words, and hand the rest on to the
    # base class as they do (Python 3.11's standard library, run beside it).
    for plain, lean in twins():
        args = _ARGS[plain.__name__][0]
        p, q = made(plain, args), made(lean, args)
        for name in [*args, "a", "other"]:
            assert _refusal(lambda o=q, n=name: setattr(o, n, 5)) == _refusal(
                lambda o=p, n=name: setattr(o, n, 5)
            )
            assert _refusal(lambda o=q, n=name: delattr(o, n)) == _refusal(
                lambda o=p, n=name: delattr(o, n)
            )

        class Sub(lean):  # type: ignore[misc,valid-type]  # a plain subclass, as _Lean is
            pass

        class PlainSub(plain):  # type: ignore[misc,valid-type]
            pass

        s, t = Sub(**args), PlainSub(**args)
        s.extra, t.extra = 1, 1  # not a field, not the frozen class itself: allowed
        del s.extra, t.extra
        for name in args:
            assert _refusal(lambda o=s, n=name: setattr(o, n, 5)) == _refusal(
                lambda o=t, n=name: setattr(o, n, 5)
            )
        assert lean.__setattr__.__qualname__ == f"{lean.__qualname__}.__setattr__"
        if records.GUARDS_AS_KNOWN:  # the closures were asked, not dataclass's source text
            assert lean.__setattr__.__code__.co_filename == records.__file__


def test_the_maker_of_the_guards_is_put_back():
    frozen_record(_one())
    assert dataclasses._frozen_get_del_attr is records._MAKER  # type: ignore[attr-defined]
    with pytest.raises(TypeError):  # dataclass refuses the class: the maker is put back too

        @frozen_record
        class Bad:
            a: int = 0
            b: int

    assert dataclasses._frozen_get_del_attr is records._MAKER  # type: ignore[attr-defined]
    assert records.GUARDS_AS_KNOWN == (records.sys.version_info[:2] == (3, 11))
