"""checker.record against the standard library's dataclasses, which it must match."""

from __future__ import annotations

import dataclasses
import pathlib
import pickle
import re
from dataclasses import field

import pytest

from checker.record import record

ROOT = pathlib.Path(__file__).resolve().parent.parent


@record(frozen=True)
class Sent:
    """A record as the workers send them between processes."""

    name: str
    values: tuple = ()


def test_records_cross_processes_by_pickle():
    sent = Sent("r1", (1.0, 2.0))
    assert pickle.loads(pickle.dumps(sent)) == sent


def _pair(frozen: bool):
    """The same class made by @record and by @dataclass."""
    def body():
        return {"__annotations__": {"a": "int", "b": "float", "c": "tuple", "d": "list"},
                "b": 0.5, "c": field(default=(), compare=False),
                "d": field(default_factory=list)}
    ours = record(type("Part", (), body()), frozen=frozen)
    theirs = dataclasses.dataclass(type("Part", (), body()), frozen=frozen)
    return ours, theirs


@pytest.mark.parametrize("frozen", [True, False])
def test_behaves_as_the_standard_dataclass(frozen):
    ours, theirs = _pair(frozen)
    for args, kwargs in [((1,), {}), ((1, 2.0), {"c": (3,)}), ((), {"a": 4, "d": [1]})]:
        mine, std = ours(*args, **kwargs), theirs(*args, **kwargs)
        assert repr(mine) == repr(std)
        assert dataclasses.asdict(mine) == dataclasses.asdict(std)
        assert (mine == ours(*args, **kwargs)) is True
    assert ours(1, c=(1,)) == ours(1, c=(2,))  # compare=False fields do not count
    assert ours(1) != ours(2) and ours(1) != theirs(1)  # another class is never equal
    assert ours(1).d is not ours(1).d  # a factory runs per instance
    assert dataclasses.replace(ours(1), b=3.0) == ours(1, 3.0)
    assert [f.name for f in dataclasses.fields(ours)] == ["a", "b", "c", "d"]
    for bad in [((), {}), ((1, 2, 3, 4, 5), {}), ((1,), {"e": 1}), ((1,), {"a": 1})]:
        with pytest.raises(TypeError) as mine_error:
            ours(*bad[0], **bad[1])
        with pytest.raises(TypeError) as std_error:
            theirs(*bad[0], **bad[1])
        assert str(mine_error.value) == str(std_error.value)


def test_frozen_records_refuse_assignment_and_hash_like_dataclasses():
    ours, theirs = _pair(frozen=True)
    with pytest.raises(dataclasses.FrozenInstanceError):
        ours(1).a = 2
    with pytest.raises(dataclasses.FrozenInstanceError):
        del ours(1).a
    hashable = record(type("Key", (), {"__annotations__": {"a": "int", "b": "str"}}),
                      frozen=True)
    assert hash(hashable(1, "x")) == hash((1, "x"))  # the standard: hash of the fields
    assert ours.__hash__ is not None and _pair(frozen=False)[0].__hash__ is None
    assert theirs.__hash__ is not None


def test_unsupported_features_are_refused():
    with pytest.raises(TypeError, match="plain fields"):
        record(type("K", (), {"__annotations__": {"a": "dataclasses.InitVar[int]"}}))
    with pytest.raises(TypeError, match="__post_init__"):
        record(type("P", (), {"__annotations__": {"a": "int"},
                              "__post_init__": lambda self: None}))


def test_no_module_uses_the_compiling_decorator():
    """Every record class of the package goes through @record (the cold start)."""
    users = [str(p.relative_to(ROOT)) for folder in ("checker", "rules")
             for p in (ROOT / folder).rglob("*.py")
             if re.search(r"^\s*@(dataclasses\.)?dataclass\b", p.read_text(), re.M)]
    assert users == []
