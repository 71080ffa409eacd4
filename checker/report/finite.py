"""Plain JSON values for the machine formats: NaN and the infinities are not JSON.

JSON (RFC 8259, section 6) has no NaN or Infinity; Python's json module would write
them as bare words that strict readers refuse. A figure that is not a finite number
carries no value a reader could use, so it becomes null (the reports' "does not apply").
numpy scalars become plain numbers and tuples become lists on the way.
"""

from __future__ import annotations

import math


def finite_json(value):
    """``value`` with every non-finite float replaced by None, recursively (dicts, lists
    and tuples); numbers that are numpy scalars become Python numbers."""
    if isinstance(value, bool) or value is None or isinstance(value, str):
        return value
    if isinstance(value, dict):
        return {key: finite_json(item) for key, item in value.items()}
    if isinstance(value, (list, tuple)):
        return [finite_json(item) for item in value]
    if isinstance(value, int):
        return value
    if isinstance(value, float):
        return value if math.isfinite(value) else None
    item = getattr(value, "item", None)  # a numpy scalar
    if callable(item):
        return finite_json(item())
    return value
