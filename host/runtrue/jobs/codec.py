"""One codec for every stored record: a dataclass to the JSON-able dict the job store keeps, and back.

The stored form follows each record's fields and their type hints:

* a field is stored under its own name, in field order (or :attr:`StoredForm.order`);
* ``complex`` is stored as ``[re, im]``; a tuple or a list as a JSON list; a nested record as
  its own stored form; ``X | None`` as ``null`` or the stored ``X``;
* reading back, each value is converted to its field's type (``float``, ``int``, ``str``,
  ``bool``) as the store always did, a key that is missing takes the field's default (records
  written by an older version lack the fields added since), and a missing key of a field
  without a default raises ``KeyError`` naming it; an empty object in place of an optional
  record means none.

Where a record's stored form differs from its fields it says so in a class attribute
``STORED = StoredForm(...)``: fields kept elsewhere (a row id), fields left out while empty, the
key order.  Records get ``to_dict()`` and ``from_dict()`` from :class:`Record`.

Nothing here knows any particular record, and nothing here imports numpy: cheap to import.
"""

from __future__ import annotations

import dataclasses
import types
import typing
from collections.abc import Mapping
from dataclasses import dataclass
from typing import Any, ClassVar, TypeVar, Union

_R = TypeVar("_R", bound="Record")


@dataclass(frozen=True)
class StoredForm:
    """How a record's stored form differs from its fields.

    ``unstored``: fields not written (the row id, which the store keeps in its own column);
    ``omit_empty``: fields written only when not empty (so records without them stay as they
    were); ``order``: the key order when it is not the field order (fields not named follow in
    field order).
    """

    unstored: frozenset[str] = frozenset()
    omit_empty: frozenset[str] = frozenset()
    order: tuple[str, ...] = ()


class Record:
    """A stored record: gives a dataclass ``to_dict()`` and ``from_dict()`` through this codec."""

    STORED: ClassVar[StoredForm] = StoredForm()

    def to_dict(self) -> dict[str, Any]:
        return encode(self)

    @classmethod
    def from_dict(cls: type[_R], d: Mapping[str, Any]) -> _R:
        return decode(cls, d)


_FIELDS: dict[type, tuple[tuple[dataclasses.Field[Any], Any], ...]] = {}


def _fields(cls: type) -> tuple[tuple[dataclasses.Field[Any], Any], ...]:
    """The stored fields of a record class in stored order, each with its resolved type hint."""
    known = _FIELDS.get(cls)
    if known is not None:
        return known
    form: StoredForm = getattr(cls, "STORED", StoredForm())
    hints = typing.get_type_hints(cls)
    by_name = {f.name: f for f in dataclasses.fields(cls) if f.name not in form.unstored}
    names = [n for n in form.order if n in by_name] + [n for n in by_name if n not in form.order]
    _FIELDS[cls] = tuple((by_name[n], hints[n]) for n in names)
    return _FIELDS[cls]


def _is_empty(value: Any) -> bool:
    return value is None or (isinstance(value, (str, tuple, list, dict)) and not value)


def encode(record: Any) -> dict[str, Any]:
    """The stored form of ``record`` (a dataclass): a dict of JSON-able values."""
    form: StoredForm = getattr(record, "STORED", StoredForm())
    out: dict[str, Any] = {}
    for f, _ in _fields(type(record)):
        value = getattr(record, f.name)
        if f.name in form.omit_empty and _is_empty(value):
            continue
        out[f.name] = _encode_value(value)
    return out


def _encode_value(value: Any) -> Any:
    if isinstance(value, complex):
        return [float(value.real), float(value.imag)]
    if isinstance(value, (list, tuple)):
        return [_encode_value(v) for v in value]
    if dataclasses.is_dataclass(value) and not isinstance(value, type):
        return encode(value)
    return value


def decode(cls: type[_R], data: Mapping[str, Any], **unstored: Any) -> _R:
    """The record of type ``cls`` stored as ``data``; ``unstored`` gives the fields kept elsewhere
    (``id=``).  Raises ``KeyError`` (a required field missing), ``TypeError`` or ``ValueError``
    (a value of the wrong kind) or whatever the record's own checks raise."""
    if not isinstance(data, Mapping):
        raise TypeError(f"a stored {cls.__name__} is an object, not {type(data).__name__}")
    kwargs: dict[str, Any] = dict(unstored)
    for f, hint in _fields(cls):
        if f.name in data:
            kwargs[f.name] = _decode_value(hint, data[f.name])
        elif f.default is dataclasses.MISSING and f.default_factory is dataclasses.MISSING:
            raise KeyError(f.name)
    return cls(**kwargs)


def _decode_value(hint: Any, value: Any) -> Any:
    origin = typing.get_origin(hint)
    args = typing.get_args(hint)
    if origin in (Union, types.UnionType):
        inner = [a for a in args if a is not type(None)]
        if value is None or (not value and any(dataclasses.is_dataclass(a) for a in inner)):
            return None
        return _decode_value(inner[0] if len(inner) == 1 else Any, value)
    if origin is typing.Literal or hint is Any:
        return value
    if origin is tuple:
        item = args[0] if args else Any
        return tuple(_decode_value(item, v) for v in _sequence(value))
    if origin is list:
        item = args[0] if args else Any
        return [_decode_value(item, v) for v in _sequence(value)]
    if hint is complex:
        re, im = _sequence(value)
        return complex(float(re), float(im))
    if hint in (float, int, str, bool):
        return hint(value)
    if isinstance(hint, type) and dataclasses.is_dataclass(hint):
        return decode(hint, value)  # type: ignore[type-var]
    raise TypeError(f"the codec cannot read a field of type {hint!r}")


def _sequence(value: Any) -> list[Any]:
    """A stored JSON list (a string or an object is not one)."""
    if not isinstance(value, (list, tuple)):
        raise TypeError(f"expected a list, got {type(value).__name__}")
    return list(value)
