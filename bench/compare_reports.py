"""Compare the findings of two JSON reports of the same files: rule, stage, elements,
line, severity, message and suggestion text alike, measured and limit within a relative
tolerance. Prints every difference; exit status 1 when there is one.

Run: .venv/bin/python bench/compare_reports.py BEFORE.json AFTER.json [--rel 1e-9]
"""

from __future__ import annotations

import argparse
import json
import math
import sys


def findings(path: str) -> list[dict]:
    with open(path, encoding="utf-8") as handle:
        report = json.load(handle)
    return [finding for item in report["files"] for stage in item.get("stages", [])
            for finding in stage.get("findings", [])]


def close(x, y, rel: float) -> bool:
    if isinstance(x, (int, float)) and isinstance(y, (int, float)):
        return x == y or (math.isfinite(x) and math.isfinite(y)
                          and abs(x - y) <= rel * max(abs(x), abs(y)))
    return x == y


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("before")
    parser.add_argument("after")
    parser.add_argument("--rel", type=float, default=1e-9)
    args = parser.parse_args()
    before, after = findings(args.before), findings(args.after)
    differences = 0
    if len(before) != len(after):
        print(f"{len(before)} findings before, {len(after)} after")
        differences += 1
    for old, new in zip(before, after):
        for key in sorted(set(old) | set(new)):
            if not close(old.get(key), new.get(key), args.rel):
                print(f"{old.get('stage')} {old.get('rule')}: {key} {old.get(key)!r} ->"
                      f" {new.get(key)!r}")
                differences += 1
    print(f"{len(before)} findings compared, {differences} differences"
          f" (numbers within {args.rel:g} relative)")
    return 1 if differences else 0


if __name__ == "__main__":
    sys.exit(main())
