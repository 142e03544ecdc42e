"""Parts of a frozen result value that are computed when first read, then kept.

A recompute after one edit needs the decision (the partition's F and p) at once; the
tables around it (level tables with their intervals, effect sizes, per-row fits, the
parts of a mixed model) are read only when something shows or checks them. A frozen
dataclass declares which of its fields may be given as ``deferred(make)``
(:func:`deferrable`); the first read of such a field calls ``make()`` once and keeps the
value in the instance, so later reads cost an ordinary attribute read and every reader
sees the same object. Nothing else changes for readers: equality, ``repr``, HTML,
``to_frame``, ``dataclasses.replace``, ``copy`` and ``pickle`` read the fields as values
(``copy`` and ``pickle`` make the deferred parts first: a ``make`` is a closure over the
edit's state and is never stored). :func:`replace_deferred` is ``dataclasses.replace``
that leaves the deferred parts unmade (the copy and the original share them: made once
for both).

A ``make`` must be pure: what it returns depends only on what it closed over, which must
not change afterwards (the kit's arrays are read-only), so a value made late equals the
value made at once.
"""

from __future__ import annotations

from collections.abc import Callable
from typing import Any, Generic, TypeVar

__all__ = ["Deferred", "deferred", "deferrable", "replace_deferred", "is_made"]

T = TypeVar("T")
C = TypeVar("C", bound=type)


class Deferred(Generic[T]):
    """A value made by ``make()`` on first :meth:`get`, then kept (``make`` is dropped)."""

    __slots__ = ("_make", "_value")

    def __init__(self, make: Callable[[], T]) -> None:
        self._make: Callable[[], T] | None = make
        self._value: T | None = None

    @property
    def made(self) -> bool:
        return self._make is None

    def get(self) -> T:
        make = self._make
        if make is not None:
            self._value = make()
            self._make = None
        return self._value  # type: ignore[return-value]

    def __repr__(self) -> str:
        return f"<deferred {'made' if self.made else 'not made yet'}>"

    def __reduce__(self) -> Any:  # a closure is never pickled: the value is
        return (_value_of, (self.get(),))


def _value_of(value: T) -> T:
    return value


def deferred(make: Callable[[], T]) -> T:
    """A field value computed by ``make()`` when the field is first read (only for :func:`deferrable` fields).

    Typed as the value it stands for, so a deferred part passes where the part itself is expected.
    """
    return Deferred(make)  # type: ignore[return-value]


class _DeferrableField:
    """Data descriptor over one dataclass field: stores what it is given, makes a :class:`Deferred` on read."""

    __slots__ = ("name",)

    def __init__(self, name: str) -> None:
        self.name = name

    def __get__(self, obj: Any, owner: type | None = None) -> Any:
        if obj is None:
            return self
        try:
            value = obj.__dict__[self.name]
        except KeyError:
            raise AttributeError(self.name) from None
        if type(value) is Deferred:
            value = value.get()
            obj.__dict__[self.name] = value
        return value

    def __set__(self, obj: Any, value: Any) -> None:  # reached by the dataclass __init__ (object.__setattr__)
        obj.__dict__[self.name] = value


def _made_state(self: Any) -> dict[str, Any]:
    """Pickle/copy state: every deferred part made (its ``make`` is not stored)."""
    state = dict(self.__dict__)
    for name, value in state.items():
        if type(value) is Deferred:
            state[name] = getattr(self, name)
    return state


def deferrable(*names: str) -> Callable[[C], C]:
    """Class decorator (put it above ``@dataclass``): the fields ``names`` accept ``deferred(make)``.

    Reading such a field makes it once and keeps it; ``pickle``/``copy`` store made values.
    """

    def wrap(cls: C) -> C:
        fields = getattr(cls, "__dataclass_fields__", None)
        if fields is None:
            raise TypeError(f"{cls.__name__}: @deferrable goes above @dataclass")
        unknown = [n for n in names if n not in fields]
        if unknown:
            raise TypeError(f"{cls.__name__} has no fields {unknown}")
        for name in names:
            setattr(cls, name, _DeferrableField(name))
        cls.__getstate__ = _made_state  # type: ignore[attr-defined]
        return cls

    return wrap


def replace_deferred(obj: T, /, **changes: Any) -> T:
    """``dataclasses.replace(obj, **changes)`` without making ``obj``'s deferred parts: the new value
    shares them (made once, for both, when either is read). ``changes`` name init fields; no
    ``__post_init__`` runs (for result values, which have none)."""
    cls = type(obj)
    fields = cls.__dataclass_fields__  # type: ignore[attr-defined]
    unknown = [n for n in changes if n not in fields or not fields[n].init]
    if unknown:
        raise TypeError(f"{cls.__name__} has no init fields {unknown}")
    if getattr(cls, "__post_init__", None) is not None:
        raise TypeError(f"{cls.__name__} checks its fields in __post_init__: use dataclasses.replace")
    new = object.__new__(cls)
    new.__dict__.update(obj.__dict__)
    for name, value in changes.items():
        object.__setattr__(new, name, value)
    return new


def is_made(obj: Any, name: str) -> bool:
    """Whether the field ``name`` of ``obj`` holds its value (``False``: deferred and not read yet)."""
    value = obj.__dict__[name]
    return type(value) is not Deferred or value.made
