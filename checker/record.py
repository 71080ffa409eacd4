"""The project's record classes: standard dataclasses whose methods cost nothing at import.

``@record`` and ``@record(frozen=True)`` make a class a standard dataclass
(``dataclasses.fields``, ``replace``, ``asdict`` and ``is_dataclass`` work on it as on
any), with the same ``__init__``, ``__repr__``, ``__eq__`` and ``__hash__`` behaviour
as ``@dataclass`` and ``@dataclass(frozen=True)`` would give it. What differs is when
the methods are made. The standard decorator compiles five or six methods from source
for every class when its module is imported: about 1.3 ms a class on the reference
machine, over 110 ms of a one-file check's 240 ms of its own start (bench/audit_bench.py).
Here ``__repr__``, ``__eq__``, ``__hash__`` and the frozen guard are shared functions
that read the class's fields, and ``__init__`` is compiled the first time the class is
instantiated, so a class a run never makes costs nothing, and instances are made at the
standard speed afterwards.

Supported: defaults, ``default_factory``, ``field(compare=False)``, ``field(repr=False)``,
``field(init=False)`` with a default, and inheritance between records. Not supported
(refused at class creation): ``__post_init__``, ``InitVar``, ``ClassVar`` fields and
keyword-only fields, which no record here uses.
"""

from __future__ import annotations

import dataclasses
import reprlib
import sys
from collections.abc import Callable
from typing import TYPE_CHECKING, Any, TypeVar, overload

if TYPE_CHECKING:  # the type checker's own stubs know it on every Python version
    from typing_extensions import dataclass_transform
elif sys.version_info >= (3, 11):
    from typing import dataclass_transform
else:  # pragma: no cover - Python 3.10: the marker only informs type checkers
    def dataclass_transform(**_kwargs):
        return lambda decorator: decorator

T = TypeVar("T", bound=type)
_MISSING = dataclasses.MISSING


class _Factory:
    """The default of a parameter whose field has a default_factory."""

    def __repr__(self) -> str:
        return "<factory>"


_FACTORY = _Factory()


def _compiled_init(cls: type) -> Callable[..., None]:
    """``cls.__init__`` as the standard decorator writes it: positional-or-keyword
    parameters in field order, defaults bound, factories called per instance."""
    namespace: dict[str, Any] = {"_set": object.__setattr__, "_FACTORY": _FACTORY}
    parameters, body = ["self"], []
    for k, f in enumerate(dataclasses.fields(cls)):
        if f.default is not _MISSING:
            namespace[f"_default_{k}"] = f.default
        if f.default_factory is not _MISSING:
            namespace[f"_factory_{k}"] = f.default_factory
        if not f.init:
            value = f"_default_{k}" if f.default is not _MISSING else f"_factory_{k}()"
            body.append(f"    _set(self, {f.name!r}, {value})")
            continue
        if f.default is not _MISSING:
            parameters.append(f"{f.name}=_default_{k}")
        elif f.default_factory is not _MISSING:
            parameters.append(f"{f.name}=_FACTORY")
            body.append(f"    if {f.name} is _FACTORY:\n        {f.name} = _factory_{k}()")
        else:
            parameters.append(f.name)
        body.append(f"    _set(self, {f.name!r}, {f.name})")
    source = f"def __init__({', '.join(parameters)}):\n" + ("\n".join(body) or "    pass")
    exec(source, namespace)  # the same technique as the standard library's decorator
    init = namespace["__init__"]
    init.__qualname__ = f"{cls.__qualname__}.__init__"
    return init


def _first_init(cls: type) -> Callable[..., None]:
    def __init__(self, *args, **kwargs) -> None:
        if cls.__dict__.get("__init__") is __init__:  # not yet compiled
            cls.__init__ = _compiled_init(cls)  # type: ignore[misc]
        cls.__init__(self, *args, **kwargs)  # type: ignore[misc]
    return __init__


def _compared(self) -> tuple:
    return tuple(getattr(self, f.name) for f in dataclasses.fields(self) if f.compare)


def _eq(self, other):
    if other.__class__ is self.__class__:
        return _compared(self) == _compared(other)
    return NotImplemented


def _hash(self) -> int:
    return hash(_compared(self))


@reprlib.recursive_repr()
def _repr(self) -> str:
    shown = ", ".join(f"{f.name}={getattr(self, f.name)!r}"
                      for f in dataclasses.fields(self) if f.repr)
    return f"{self.__class__.__qualname__}({shown})"


def _frozen_guard(cls: Any):
    names = {f.name for f in dataclasses.fields(cls)}

    def __setattr__(self, name, value):
        if type(self) is cls or name in names:
            raise dataclasses.FrozenInstanceError(f"cannot assign to field {name!r}")
        super(cls, self).__setattr__(name, value)

    def __delattr__(self, name):
        if type(self) is cls or name in names:
            raise dataclasses.FrozenInstanceError(f"cannot delete field {name!r}")
        super(cls, self).__delattr__(name)

    return __setattr__, __delattr__


def _refuse_unsupported(cls: type) -> None:
    if "__post_init__" in cls.__dict__:
        raise TypeError(f"{cls.__qualname__}: records take no __post_init__")
    fields = dataclasses.fields(cls)
    others = set(cls.__dict__.get("__annotations__", {})) - {f.name for f in fields}
    if others or any(f.kw_only is True for f in fields):  # ClassVar, InitVar, kw_only
        raise TypeError(f"{cls.__qualname__}: records take plain fields only")


def _make(cls: Any, frozen: bool) -> Any:
    own = set(cls.__dict__)
    cls = dataclasses.dataclass(cls, init=False, repr=False, eq=False)
    _refuse_unsupported(cls)
    methods: dict[str, Any] = {"__init__": _first_init(cls), "__repr__": _repr,
                               "__eq__": _eq}
    methods["__hash__"] = _hash if frozen else None  # eq without frozen: unhashable
    if frozen:
        methods["__setattr__"], methods["__delattr__"] = _frozen_guard(cls)
    for name, method in methods.items():
        if name not in own:
            setattr(cls, name, method)
    return cls


@overload
def record(cls: T, /) -> T: ...


@overload
def record(*, frozen: bool = False) -> Callable[[T], T]: ...


@dataclass_transform(field_specifiers=(dataclasses.field, dataclasses.Field))
def record(cls: T | None = None, /, *, frozen: bool = False) -> Any:
    """``@record`` or ``@record(frozen=True)``: a dataclass, made cheaply (module
    docstring)."""
    if cls is None:
        return lambda c: _make(c, frozen)
    return _make(cls, frozen)
