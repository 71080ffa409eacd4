"""The stage's signals: what the requirements' gain, bandwidth and spread are read from.

Every figure a requirement names is taken from the signal's side: from the source itself
(the voltage behind its impedance, or the current of a current source) to the stage
output. A stage with one source has one signal. Two voltage sources whose transfers have
opposite signs and whose common mode the stage rejects by at least
``PAIR_MIN_REJECTION`` form a differential pair, read as one signal Vout/(V1 - V2)
(V1 the first source written; superposition gives (H1 - H2)/2). Any other set of
sources (a summing stage) gives one signal per source, each of which must meet the
requirements.
"""

from __future__ import annotations

from checker.record import record

import numpy as np

from checker.analysis.figures import bandwidth_edges
from checker.analysis.spread import Signal

PAIR_MIN_REJECTION = 10.0  # 20 dB: a summing stage of mixed signs stays two signals


@record(frozen=True)
class SignalFigures:
    """One signal's gain from the source(s) to the stage output."""

    label: str  # "source at in", or "bridge-a − bridge-b" for a pair
    weights: Signal  # ((source index, weight), ...)
    pair: bool
    reference_hz: float  # where single numbers are read: band centre, or 0 (DC)
    gain: complex  # from the source(s), at reference_hz
    gain_from_net: complex | None  # one voltage source: from the net it drives
    response: np.ndarray  # the gain over the analysis grid, complex (F,)
    bandwidth_low_hz: float | None
    bandwidth_high_hz: float | None
    unit: str  # "V/V", or "Ω" (V/A) for a current source

    @property
    def sources(self) -> tuple[int, ...]:
        return tuple(index for index, _weight in self.weights)


def stage_signals(figures) -> list[SignalFigures]:
    """The stage's signals (none when it has no source), worked out once per stage: the
    verdicts, the rules and the report read them alike (do not change the list)."""
    return figures.cached("stage_signals", lambda: _signals(figures))


def _signals(figures) -> list[SignalFigures]:
    sources = figures.sources
    if not sources:
        return []
    if len(sources) == 2 and all(sf.source.kind == "voltage" for sf in sources):
        pair = _pair(figures)
        if pair is not None:
            return [pair]
    return [_single(sf) for sf in sources]


def _single(sf) -> SignalFigures:
    voltage = sf.source.kind == "voltage"
    return SignalFigures(
        label=sf.source.name, weights=((sf.index, 1.0),), pair=False,
        reference_hz=sf.reference_hz, gain=sf.gain_from_source_mid,
        gain_from_net=sf.gain_mid if voltage else None, response=sf.gain_from_source,
        bandwidth_low_hz=sf.bandwidth_low_hz, bandwidth_high_hz=sf.bandwidth_high_hz,
        unit="V/V" if voltage else "Ω")


def _pair(figures) -> SignalFigures | None:
    first, second = figures.sources
    reference = first.reference_hz
    h1, h2 = (complex(figures.signal_response(((sf.index, 1.0),), np.array([reference]))[0])
              for sf in (first, second))
    differential, common = abs(h1 - h2) / 2, abs(h1 + h2)
    if h1.real * h2.real >= 0 or common * PAIR_MIN_REJECTION > differential:
        return None
    weights = ((first.index, 0.5), (second.index, -0.5))
    response = 0.5 * (first.gain_from_source - second.gain_from_source)
    frequencies = figures.frequencies_hz
    at = 0 if reference <= 0 else int(np.argmin(np.abs(frequencies - reference)))
    low, high = bandwidth_edges(frequencies, response, at,
                                lambda f: figures.signal_response(weights, f))
    return SignalFigures(
        label=f"{first.source.name} − {second.source.name}", weights=weights, pair=True,
        reference_hz=reference, gain=(h1 - h2) / 2, gain_from_net=None, response=response,
        bandwidth_low_hz=low, bandwidth_high_hz=high, unit="V/V")
