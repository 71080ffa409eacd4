"""The worst-case DC error at a net from each op-amp's offset voltage and bias currents.

Each op-amp's input offset voltage is a source in series with its non-inverting input,
and its bias currents are drawn out of each input; the solved DC transfers carry them
to the net. Each input's current is Ib +/- Ios/2, and every term adds with the sign that
hurts (Vo = NG*Vos + Rf*Ib in a plain stage: Eggleston, Basic Electronics for Scientists
and Engineers, Cambridge University Press 2011, section 6.4).
"""

from __future__ import annotations

from checker.record import record

from checker.model import OpAmp

PARAMETER_NAMES = {"offset_voltage_v": "offset voltage", "bias_current_a": "bias current",
                   "offset_current_a": "offset current"}


@record(frozen=True)
class DcErrorTerms:
    """One op-amp's contribution to the DC error at a net (volts, SI)."""

    opamp: OpAmp
    noise_gain: float  # |T(vos)|: volts at the net per volt of offset
    plus: float  # T(ib+): volts at the net per ampere drawn out of in+
    minus: float  # T(ib-)
    offset_voltage: float
    bias: float
    offset_current: float

    @property
    def missing(self) -> list[str]:
        """The parameters the part does not give (counted as 0), by name."""
        return [PARAMETER_NAMES[name] for name in
                self.opamp.part.missing("offset_voltage_v", "bias_current_a",
                                        "offset_current_a")]

    @property
    def vos_term(self) -> float:
        return abs(self.offset_voltage * self.noise_gain)

    @property
    def bias_term(self) -> float:
        return abs(self.bias * (self.plus + self.minus))

    @property
    def offset_current_term(self) -> float:
        return abs(self.offset_current / 2 * (self.plus - self.minus))

    @property
    def current_terms(self) -> float:
        return self.bias_term + self.offset_current_term

    @property
    def total(self) -> float:
        return self.vos_term + self.current_terms


def dc_error_terms(figures, net: str) -> list[DcErrorTerms]:
    """Every op-amp's DC error terms at ``net``, in the stage's op-amp order."""
    terms = []
    for opamp in figures.stage.opamps:
        part = opamp.part
        terms.append(DcErrorTerms(
            opamp=opamp, noise_gain=abs(figures.dc_transfer(net, ("vos", opamp.ref))),
            plus=figures.dc_transfer(net, ("ib+", opamp.ref)),
            minus=figures.dc_transfer(net, ("ib-", opamp.ref)),
            offset_voltage=part.offset_voltage_v or 0.0, bias=part.bias_current_a or 0.0,
            offset_current=part.offset_current_a or 0.0))
    return terms
