"""No rule may fail on a legal stage: the samples with their parts swapped (sometimes for
inline parts that give almost no parameters) and resistor values perturbed, seeded."""

import pathlib
import random
import re

import pytest

from checker.build import build_stages
from checker.engine import RunOptions, check_stages, load_rules
from checker.io.load import parse_text
from checker.io.positions import InputErrors
from checker.parts.library import load_library

ROOT = pathlib.Path(__file__).resolve().parents[1]
SPARSE_PARTS = ["(params (gbw 1MHz))", "(params (open-loop-gain 1e5))",
                "(params (gbw 10MHz) (open-loop-gain 100dB) (output-resistance 0))",
                "(params (gbw 1MHz) (open-loop-gain 1e5) (input-capacitance-cm 5p))"]


def perturbed(rng: random.Random, text: str, parts: list[str]) -> str:
    def part(_match):
        return rng.choice(SPARSE_PARTS) if rng.random() < 0.5 else f"(part {rng.choice(parts)})"

    def value(match):
        if rng.random() < 0.3:
            return match.group(1) + rng.choice(["10", "1k", "100k", "10M", "1G"])
        return match.group(0)

    text = re.sub(r"\(part [a-z0-9-]+\)", part, text)
    return re.sub(r"(\(resistor \S+ \S+ \S+ )(\S+)", value, text)


@pytest.mark.parametrize("seed", range(4))
def test_no_rule_fails_on_perturbed_samples(seed):
    library = load_library()
    rules = list(load_rules().values())
    rng = random.Random(seed)
    texts = [p.read_text() for p in sorted(ROOT.glob("samples/*.stage"))]
    checked = 0
    for _ in range(25):
        text = perturbed(rng, rng.choice(texts), sorted(library))
        try:
            stages = build_stages(parse_text(text, "perturbed.stage"), library)
        except InputErrors:
            continue
        _figures, findings = check_stages(stages, rules, RunOptions())
        failed = [f.message for fs in findings.values() for f in fs if f.rule == "rule-failed"]
        assert failed == [], failed
        checked += 1
    assert checked > 10  # most perturbed samples still build
