"""The project's own fuzz tests: hostile text, trees and stages never get past the fence.

Deterministic and bounded (hypothesis with derandomize=True, no example database, a
fixed number of examples), so they run in a few seconds and fail the same way every
time. What they assert, whatever the input:

* the readers raise InputErrors or return a tree, nothing else;
* the builder raises InputErrors or returns stages, nothing else;
* a whole review returns a result with no rule-failed finding, no numeric warning, and
  JSON and SARIF reports that strict JSON readers accept (no NaN, no Infinity).
"""

from __future__ import annotations

import copy
import io
import json
import pathlib
import re
import warnings

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from checker.build import build_stages
from checker.engine import RunOptions, load_rules
from checker.io.load import parse_text, read_file
from checker.io.positions import InputErrors
from checker.parts.library import load_library
from checker.report import writer
from checker.report.context import ReportContext
from checker.review import review_file
import contextlib

ROOT = pathlib.Path(__file__).resolve().parents[1]
LIBRARY = load_library()
RULES = load_rules()
SAMPLES = sorted(ROOT.glob("samples/*.stage*"))
TREES = [read_file(str(path)).tree for path in SAMPLES]
FUZZ = settings(derandomize=True, database=None, deadline=None, max_examples=60,
                suppress_health_check=[HealthCheck.too_slow, HealthCheck.data_too_large])

# Values of every awkward kind: huge and tiny numbers, integers beyond the float range,
# decibels that overflow, words for infinity, units that do not fit, plain garbage.
NUMBERS = st.one_of(
    st.floats(allow_nan=True, allow_infinity=True),
    st.integers(min_value=-(10 ** 400), max_value=10 ** 400),
    st.sampled_from([0, -1, 5e-324, 1e-300, 1e300, 1e18, 1e-6, 10 ** 400]))
TEXTS = st.one_of(
    st.sampled_from(["0", "1e400", "-1e400", "7000dB", "-7000dB", "6200dB", "5e-324",
                     "1e-30k", "inf", "nan", "10k", "4k7", "1M5", "0%", "100%", "1e9%",
                     "49%", "0.5%", "1MHz", "1e15Hz", "0Hz", "2V", "-5V", "1e9V", "1pF",
                     "1e-20F", "10uH", "120dB", "0dB", "1V/us", "10nV/rtHz", "45deg",
                     "400deg", "1" + "0" * 400, "1" + "0" * 400 + "k"]),
    st.text(max_size=12))
VALUES = st.one_of(NUMBERS, TEXTS)


def _strict_json(text: str):
    """json.loads that refuses NaN and the infinities, as strict readers do."""
    def refuse(word):
        raise ValueError(f"not JSON: {word}")

    return json.loads(text, parse_constant=refuse)


def _value_slots(tree, path=()):
    """Paths of every scalar in a stage tree that is a value (not a name or a net)."""
    names = {"name", "ref", "net", "nets", "ground", "in+", "in-", "out", "v+", "v-",
             "part", "label", "note", "class", "kind", "rule", "reason", "stage"}
    if isinstance(tree, dict):
        for key, item in tree.items():
            if key not in names:
                yield from _value_slots(item, path + (key,))
    elif isinstance(tree, list):
        for i, item in enumerate(tree):
            yield from _value_slots(item, path + (i,))
    else:
        yield path


def _set(tree, path, value):
    node = tree
    for key in path[:-1]:
        node = node[key]
    node[path[-1]] = value


@st.composite
def mutated_trees(draw):
    """A sample's tree with a few of its values replaced by awkward ones."""
    tree = copy.deepcopy(draw(st.sampled_from(TREES)))
    slots = list(_value_slots(tree))
    for _ in range(draw(st.integers(1, 4))):
        _set(tree, draw(st.sampled_from(slots)), draw(VALUES))
    return tree


_NUMBER_AND_UNIT = re.compile(r"^([+-]?\d+\.?\d*(?:[eE][+-]?\d+)?)(.*)$")
FACTORS = st.sampled_from([0.0, -1.0, 1e-9, 1e-6, 1e-3, 0.1, 0.5, 2.0, 10.0, 1e3, 1e6, 1e9])


def _scaled(value, factor: float):
    """A value scaled by ``factor``, keeping its unit (4k7 and other RKM codes as are)."""
    if isinstance(value, bool):
        return value
    if isinstance(value, (int, float)):
        return value * factor
    match = _NUMBER_AND_UNIT.match(value) if isinstance(value, str) else None
    return f"{float(match.group(1)) * factor:g}{match.group(2)}" if match else value


@st.composite
def scaled_trees(draw):
    """A sample's tree with a few values scaled: mostly still a stage that builds, at
    the edges of what a designer could write (zero, negative, a thousand times off)."""
    tree = copy.deepcopy(draw(st.sampled_from(TREES)))
    slots = list(_value_slots(tree))
    for _ in range(draw(st.integers(1, 4))):
        path = draw(st.sampled_from(slots))
        node = tree
        for key in path[:-1]:
            node = node[key]
        node[path[-1]] = _scaled(node[path[-1]], draw(FACTORS))
    return tree


@FUZZ
@given(st.text(max_size=300))
def test_sexp_reader_raises_only_input_errors(text):
    with contextlib.suppress(InputErrors):
        parse_text(text, "f.stage", "sexp")


@FUZZ
@given(st.text(max_size=300))
def test_json_reader_raises_only_input_errors(text):
    with contextlib.suppress(InputErrors):
        parse_text(text, "f.stage.json", "json")


@FUZZ
@given(st.sampled_from(TREES), st.data())
def test_json_reader_survives_a_cut_or_spliced_document(tree, data):
    text = json.dumps(tree)
    cut = data.draw(st.integers(0, len(text)))
    splice = data.draw(st.sampled_from(["", "{", "[", "]", "}", '"', ",", ":", "1e999",
                                        "NaN", "\\u0000", "[" * 200]))
    with contextlib.suppress(InputErrors):
        parse_text(text[:cut] + splice + text[cut:], "f.stage.json", "json")


@FUZZ
@given(mutated_trees())
def test_builder_raises_only_input_errors(tree):
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        try:
            build_stages(parse_text(json.dumps(tree), "f.stage.json"), LIBRARY)
        except InputErrors as errors:
            assert all(p.line >= 1 and p.column >= 1 for p in errors.problems)
    assert [str(w.message) for w in caught] == []


def _reports(result) -> dict[str, str]:
    context = ReportContext("0", None, RULES)
    texts = {}
    for name in ("json", "sarif"):
        out = io.StringIO()
        report = writer(name, out, context)
        report.add(result)
        report.close()
        texts[name] = out.getvalue()
    return texts


@settings(FUZZ, max_examples=100)
@given(st.one_of(scaled_trees(), scaled_trees(), mutated_trees()))
def test_a_whole_review_never_fails_and_writes_strict_json(tmp_path_factory, tree):
    path = tmp_path_factory.mktemp("fuzz") / "f.stage.json"
    path.write_text(json.dumps(tree), encoding="utf-8")
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        result = review_file(str(path), LIBRARY, list(RULES.values()), RunOptions())
        texts = _reports(result)
    assert [f"{w.filename}:{w.lineno}: {w.message}" for w in caught] == []
    failed = [f.message for f in result.findings() if f.rule == "rule-failed"]
    assert failed == []
    document = _strict_json(texts["json"])
    assert document["files"][0]["path"] == str(path)
    _strict_json(texts["sarif"])
    for finding in result.findings():
        assert "nan" not in finding.message.split() and "inf" not in finding.message.split()


@pytest.mark.parametrize("sample", SAMPLES[:6], ids=lambda p: p.name)
def test_every_sample_reviews_without_a_warning(sample):
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always")
        result = review_file(str(sample), LIBRARY, list(RULES.values()), RunOptions())
    assert [str(w.message) for w in caught] == []
    assert not [f for f in result.findings() if f.rule in ("rule-failed", "review-failed")]
