"""Generate N synthetic but varied stage files for audit benchmarks.

Every topology the analysis recognises, both syntaxes, random (seeded) part classes and
values, and about 2 % broken files (syntax errors, unknown parts, bad units). With
``--hostile F`` a share F of the files are the worst-case families of hostile_bench.py
(in turn), and byte-level garbage: the audit must report every one of them.

With ``--requirements`` every stage states requirements as the samples do (gain with a
tolerance, bandwidth, DC error, noise, phase margin), its resistors carry tolerances and
its source a band: the requirement set, on which the heaviest rules (the tolerance
analyses, noise, the requirement verdicts) run.

Run: .venv/bin/python bench/generate_stages.py FOLDER N [--seed S] [--hostile F]
    [--requirements]
"""

from __future__ import annotations

import argparse
import json
import os
import random

from checker.io.sexp_reader import read_sexp
from checker.units import parse_value

PARTS = ["gp-bipolar", "precision-bipolar", "jfet-input", "cmos-rrio", "high-speed",
         "decomp-bipolar-g5"]
E24 = [1.0, 1.1, 1.2, 1.3, 1.5, 1.6, 1.8, 2.0, 2.2, 2.4, 2.7, 3.0, 3.3, 3.6, 3.9, 4.3, 4.7,
       5.1, 5.6, 6.2, 6.8, 7.5, 8.2, 9.1]


def value(rng: random.Random, low_exp: int, high_exp: int, unit: str = "") -> str:
    mantissa = rng.choice(E24 if low_exp >= 0 else E24[::2])  # capacitors from E12
    exponent = rng.randint(low_exp, high_exp)
    number = mantissa * 10 ** exponent
    for factor, prefix in ((1e6, "M"), (1e3, "k"), (1.0, ""), (1e-3, "m"), (1e-6, "u"),
                           (1e-9, "n"), (1e-12, "p")):
        if number >= factor:
            return f"{number / factor:.3g}{prefix}{unit}"
    return f"{number:.3g}{unit}"


# Ideal closed-loop gain of each kind from its resistors (common practice: -R2/R1,
# 1 + R2/R1, a follower, a T-network, a unity difference amplifier); None: no linear gain
# to require (a comparator).
def ideal_gain(kind: int, r1: float, r2: float, r4: float) -> float | None:
    return {0: -r2 / r1, 1: 1 + r2 / r1, 2: 1.0, 3: -(2 * r1 + r1 * r1 / r4) / r1,
            4: None, 5: -r2 / r1, 6: None, 7: None}[kind]


def requirement_text(rng: random.Random, gain: float | None) -> str:
    """A requirement like the samples': the gain within a tolerance (stated a little off
    the ideal now and then, as a legacy design drifts), bandwidth, DC error, noise and
    phase margin."""
    items = []
    if gain is not None:
        stated = gain * rng.choice([1.0, 1.0, 1.0, 1.03])
        items.append(f"(gain {stated:.4g}) (gain-tolerance {rng.choice(['1%', '2%', '5%'])})")
    items.append(f"(bandwidth {rng.choice(['500Hz', '1kHz', '5kHz'])})")
    items.append(f"(dc-error {rng.choice(['5mV', '20mV', '50mV'])})")
    items.append(f"(noise {rng.choice(['20uV', '100uV'])}) (phase-margin 45deg)")
    return "(require " + " ".join(items) + ")"


def stage_text(rng: random.Random, index: int, requirements: bool = False) -> str:
    """One plausible stage of eight kinds; about one in five carries a deliberate defect
    (as in a legacy audit, where most stages pass)."""
    part = rng.choice(PARTS[:4])
    rails = ("(supply vcc 2.5V) (supply vee -2.5V) (ground gnd)" if part.startswith("cmos")
             else "(supply vcc 15V) (supply vee -15V) (ground gnd)")
    opamp = f"(opamp U1 (part {part}) (in+ {{p}}) (in- {{m}}) (out out) (v+ vcc) (v- vee))"
    defect = rng.random() < 0.2
    r1 = value(rng, 3, 4)
    r2 = value(rng, 3, 4)
    impedance = value(rng, 1, 2) if not defect else value(rng, 3, 4)
    band = rng.choice(["1kHz", "5kHz", "10kHz"])
    source = (f"(source in (range -0.2V 0.2V) (band {rng.choice(['1Hz', '10Hz'])} {band})"
              f" (impedance {impedance}))")
    load_cap = value(rng, -12, -11) if not defect else value(rng, -9, -8)
    load = f"(load out (resistance {value(rng, 4, 4)}) (capacitance {load_cap}))"
    kind = index % 8
    fb_cap = f"(capacitor C1 fb out {value(rng, -12, -11)})"
    body = {
        0: (opamp.format(p="gnd", m="fb"), f"(resistor R1 in fb {r1}) (resistor R2 fb out {r2})"
            f" {fb_cap}"),
        1: (opamp.format(p="in", m="fb"), f"(resistor R1 fb gnd {r1}) (resistor R2 fb out {r2})"
            f" {fb_cap}"),
        2: (opamp.format(p="in", m="out"), ""),
        3: (opamp.format(p="gnd", m="fb"), f"(resistor R1 in fb {r1}) (resistor R2 fb tee {r1})"
            f" (resistor R3 tee out {r1}) (resistor R4 tee gnd {value(rng, 2, 3)}) {fb_cap}"),
        4: (opamp.format(p="pos", m="fb"), f"(resistor R1 in fb {r1} (tolerance 0.1%))"
            f" (resistor R2 fb out {r1} (tolerance 0.1%)) (resistor R3 in2 pos {r1}"
            f" (tolerance 0.1%)) (resistor R4 pos gnd {r1} (tolerance 0.1%))"),
        5: (opamp.format(p="gnd", m="fb"), f"(resistor R1 in fb {r1}) (resistor R2 fb out {r2})"
            f" {fb_cap}"),
        6: (opamp.format(p="in", m="ref"), "(resistor R1 vcc ref 10k) (resistor R2 ref gnd 10k)"),
        7: (opamp.format(p="gnd", m="fb"), f"(resistor R1 in fb {r1}) (capacitor C1 fb out"
            f" {value(rng, -9, -8)}) (resistor R2 fb out {value(rng, 5, 5)})"),
    }[kind]
    extra = f" (source in2 (range -0.2V 0.2V) (impedance {impedance}))" if kind == 4 else ""
    if not requirements:
        return (f"(stage bench-{index} {rails}\n  {body[0]}\n  {body[1]}\n  {source}{extra}\n"
                f"  {load})\n")
    network = body[1]
    if kind not in (4, 6):  # the difference amplifier states 0.1 %; the divider is exact
        network = network.replace(")", " (tolerance 1%))")
    r4 = body[1].split("R4 tee gnd ")[1].split(")")[0] if kind == 3 else "1k"
    gain = ideal_gain(kind, parse_value(r1, "resistance"), parse_value(r2, "resistance"),
                      parse_value(r4, "resistance"))
    return (f"(stage bench-{index} {rails}\n  {body[0]}\n  {network}\n  {source}{extra}\n"
            f"  {load}\n  {requirement_text(rng, gain)})\n")


BROKEN = [
    "(stage broken (ground gnd)\n  (opamp U1 (part gp-bipolar) (in+ a) (in- b)",
    "(stage broken (ground gnd) (supply vcc 5V)\n  (opamp U1 (part no-such-part) (in+ a)"
    " (in- a) (out o) (v+ vcc) (v- gnd)) (resistor R1 a o 10k))",
    "(stage broken (ground gnd) (supply vcc 5V)\n  (opamp U1 (part gp-bipolar) (in+ a)"
    " (in- a) (out o) (v+ vcc) (v- gnd)) (resistor R1 a o 10F))",
]


def hostile_texts() -> list[str | bytes]:
    """The hostile families, then byte-level garbage."""
    from hostile_bench import FAMILIES

    rng = random.Random(1)
    return [make() for make in FAMILIES.values()] + [
        "(" * 200000, "[" * 200000, bytes(rng.randrange(256) for _ in range(4000)),
        b"(stage x \xff\xfe)", "(stage \"" + "a" * 100000]


def generate(folder: str, count: int, seed: int = 7, hostile: float = 0.0,
             requirements: bool = False) -> list[str]:
    rng = random.Random(seed)
    os.makedirs(folder, exist_ok=True)
    paths = []
    families = hostile_texts() if hostile else []
    for i in range(count):
        sub = os.path.join(folder, f"board{i // 500:03d}")
        os.makedirs(sub, exist_ok=True)
        if families and rng.random() < hostile:
            path = os.path.join(sub, f"h{i:05d}.stage")
            text = families[sum(os.path.basename(p).startswith("h") for p in paths)
                            % len(families)]
            with open(path, "wb") as handle:
                handle.write(text if isinstance(text, bytes) else text.encode("utf-8"))
            paths.append(path)
            continue
        if rng.random() < 0.02:
            path = os.path.join(sub, f"s{i:05d}.stage")
            text = rng.choice(BROKEN)
        else:
            text = stage_text(rng, i, requirements)
            if i % 3 == 0:
                tree, _ = read_sexp(text, "generated")
                path = os.path.join(sub, f"s{i:05d}.stage.json")
                text = json.dumps(tree, indent=1)
            else:
                path = os.path.join(sub, f"s{i:05d}.stage")
        with open(path, "w", encoding="utf-8") as handle:
            handle.write(text)
        paths.append(path)
    return paths


if __name__ == "__main__":
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("folder")
    parser.add_argument("count", type=int)
    parser.add_argument("--seed", type=int, default=7)
    parser.add_argument("--hostile", type=float, default=0.0,
                        help="share of hostile files (e.g. 0.01)")
    parser.add_argument("--requirements", action="store_true",
                        help="stages with requirements, tolerances and bands, like the samples")
    args = parser.parse_args()
    written = generate(args.folder, args.count, args.seed, args.hostile, args.requirements)
    print(f"wrote {len(written)} files to {args.folder}")
