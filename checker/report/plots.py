"""The HTML review's plots: matplotlib figures drawn as SVG from a solved stage.

Imported only when an HTML report is asked for (matplotlib is the `html` extra). Runs in
the worker that analysed the stage, while its Figures are alive, and returns plain
records (checker/records.py: StageSheet, Plot) that pickle small.

Deterministic: the SVG backend with fixed metadata (no date, no creator), a hash salt
per plot (its stage and key, so ids stay unique on a page with many plots), DejaVu Sans
(matplotlib's bundled font) written as text, and every axis limit set from the data.
Each kind of plot keeps one Figure per process and reuses it (adding the plot's artists,
then removing them), which halves the cost of a plot; a test checks that a plot's bytes
do not depend on what was drawn before it.
"""

from __future__ import annotations

import math
import re
from contextlib import contextmanager
from io import StringIO
from typing import TYPE_CHECKING, Any

import matplotlib
import numpy as np
from markupsafe import escape
from matplotlib.backends.backend_svg import FigureCanvasSVG
from matplotlib.figure import Figure
from matplotlib.ticker import (EngFormatter, LogLocator, MaxNLocator, MultipleLocator,
                               NullFormatter, NullLocator, FixedLocator)

from checker.analysis.loop import unwrapped_phase_deg
from checker.analysis.mna import SingularCircuit
from checker.findings import Severity
from checker.records import Plot, StageSheet
from checker.report import stage_views as views
from checker.units import format_si

if TYPE_CHECKING:
    from matplotlib.typing import RcKeyType

# Our palette: four line colours a step of about 19 apart in CIE L* (24, 42, 62, 80), so
# they stay apart in greyscale, and each drawn with its own line style too; shading is
# light (L* above 85) so lines stay readable on it.
SERIES = ("#1b3a5c", "#7d5196", "#dd7f1f", "#e6c35c")
STYLES = ("-", "--", "-.", ":")
LIMIT = "#b24a2a"  # a requirement's or a rule's limit: always dashed
BAND = "#dbe7f1"  # the sources' band
WINDOW = "#f6e3c8"  # the required gain window (hatched as well)
DANGER = "#f4d9d3"  # the right half-plane, the clipped region
RAIL = "#d9d9d9"
SHADES = (BAND, WINDOW, DANGER, RAIL)
WIDTH_IN = 7.0
RC: dict[RcKeyType, Any] = {
    "font.family": "DejaVu Sans",
    "font.size": 8.5,
    "axes.titlesize": 9.5,
    "axes.titleweight": "bold",
    "axes.titlelocation": "left",
    "axes.linewidth": 0.6,
    "axes.edgecolor": "#444444",
    "axes.labelcolor": "#222222",
    "xtick.color": "#444444",
    "ytick.color": "#444444",
    "grid.color": "#cccccc",
    "grid.linewidth": 0.4,
    "legend.fontsize": 7.5,
    "legend.frameon": False,
    "svg.fonttype": "none",  # text stays text: small, selectable, read by screen readers
    "path.simplify": True,
    "svg.image_inline": True,
}
KINDS = ("loop", "response", "range", "noise", "spread", "poles")
# Which plots bear on a finding or an unmet requirement, for reviews that plot only what
# fails (an audit written to a folder): its errors and its requirements not met.
RULE_KINDS = {
    "loop": views.STABILITY_RULES,
    "poles": frozenset({"unstable-stage", "loop-margin"}),
    "response": frozenset({"bandwidth", "input-resistance", "slew-rate"}),
    "range": frozenset({"rail-headroom", "output-current", "common-mode-range", "dc-error",
                        "integrator-drift"}),
    "noise": frozenset({"noise"}),
    "spread": frozenset({"gain-tolerance", "difference-balance"}),
}
REQUIREMENT_KINDS = {"gain": ("response",), "bandwidth": ("response",),
                     "input-resistance": ("response",), "phase-margin": ("loop", "poles"),
                     "headroom": ("range",), "dc-error": ("range",), "noise": ("noise",),
                     "gain-tolerance": ("spread",), "cmrr": ("spread",)}


def kinds_bearing_on(findings, verdicts, at_least: Severity = Severity.ERROR
                     ) -> tuple[str, ...]:
    """The plots that bear on the stage's findings at ``at_least`` or above (not waived)
    and its requirements that are not met, in the review's order."""
    wanted: set[str] = set()
    keywords = {v.requirement for v in verdicts if v.not_met}
    for finding in findings:
        if finding.severity < at_least or finding.waiver is not None:
            continue
        wanted.update(kind for kind, rules in RULE_KINDS.items() if finding.rule in rules)
        if finding.details.get("loop"):
            wanted.add("loop")
        claimed = finding.details.get("requirement") or ()
        keywords.update((claimed,) if isinstance(claimed, str) else claimed)
    for keyword in keywords:
        wanted.update(REQUIREMENT_KINDS.get(keyword, ()))
    return tuple(kind for kind in KINDS if kind in wanted)


def stage_sheet(stage, figures, findings, verdicts, settings_of, scope: str) -> StageSheet:
    """The element list and the plots of one checked stage. ``scope`` "all" draws every
    plot that applies; "failing" only those bearing on its errors and its requirements
    not met (kinds_bearing_on). A plot that
    cannot be drawn becomes a note, never an error of the run."""
    elements = views.element_rows(stage)
    if not figures.solvable:
        return StageSheet(elements, (), ("the stage cannot be solved as drawn, so nothing"
                                         " is plotted",))
    kinds = KINDS if scope == "all" else kinds_bearing_on(findings, verdicts)
    plots: list[Plot] = []
    notes: list[str] = []
    salt = f"{stage.path}\x00{stage.name}"
    for kind in kinds:
        try:
            drawn, said = DRAW[kind](stage, figures, findings, settings_of, salt)
        except SingularCircuit as error:
            drawn, said = [], [f"no {kind} plot: the stage cannot be solved ({error})"]
        except Exception as error:  # a plot's bug must not stop the review
            drawn, said = [], [f"the {kind} plot could not be drawn"
                               f" ({type(error).__name__}: {error})"]
        plots.extend(drawn)
        notes.extend(said)
    return StageSheet(elements, tuple(plots), tuple(notes))


# -- canvases ------------------------------------------------------------------------------
_CANVASES: dict[tuple[str, float, int], tuple] = {}


def _canvas(kind: str, height_in: float, rows: int = 1):
    """The reused Figure of a kind of plot: (figure, canvas, axes, their own artists)."""
    key = (kind, height_in, rows)
    if key not in _CANVASES:
        with matplotlib.rc_context(RC):
            figure = Figure(figsize=(WIDTH_IN, height_in), dpi=72)
            canvas = FigureCanvasSVG(figure)
            if rows == 2:
                axes = list(figure.subplots(2, 1, sharex=True,
                                            gridspec_kw={"height_ratios": (3, 2)}))
            else:
                axes = [figure.add_subplot()]
            for ax in axes:
                ax.grid(True, which="major")
                ax.set_axisbelow(True)
                ax.tick_params(labelsize=8, length=3, width=0.6)
        own = {id(a) for ax in axes for a in ax.get_children()} | \
            {id(a) for a in figure.get_children()}
        _CANVASES[key] = (figure, canvas, axes, own)
    return _CANVASES[key]


@contextmanager
def _drawing(kind: str, height_in: float, rows: int = 1):
    """Axes to draw one plot on; the plot's own artists are removed afterwards."""
    figure, canvas, axes, own = _canvas(kind, height_in, rows)
    with matplotlib.rc_context(RC):
        try:
            yield figure, canvas, axes
        finally:
            for ax in axes:
                for artist in ax.get_children():
                    if id(artist) not in own:
                        artist.remove()
                ax.containers.clear()  # bar containers would feed the next legend
                ax.set_title("")
                ax.set_xlabel("")
                ax.set_ylabel("")
            for artist in figure.get_children():
                if id(artist) not in own:
                    artist.remove()


_PREAMBLE = re.compile(r"^.*?(?=<svg)", re.S)
_METADATA = re.compile(r"<metadata>.*?</metadata>\s*", re.S)


def _place_labels(figure) -> None:
    """Pin every axis label to the figure's edge (2 pt in): matplotlib then need not
    measure the tick labels to keep the label clear of them, a third of a plot's cost.
    The margins are wide enough for the tick labels."""
    width, height = figure.get_figwidth() * 72, figure.get_figheight() * 72
    for ax in figure.axes:
        box = ax.get_position()
        if ax.get_xlabel():
            ax.xaxis.set_label_coords(0.5, -(box.y0 - 2 / height) / box.height)
            ax.xaxis.label.set_verticalalignment("bottom")
        if ax.get_ylabel():
            ax.yaxis.set_label_coords(-(box.x0 - 2 / width) / box.width, 0.5)
            ax.yaxis.label.set_verticalalignment("top")


def _svg(canvas, salt: str, key: str, title: str, alt: str) -> str:
    """The figure as an inline SVG element: no XML preamble or metadata, a title and a
    description for assistive technology, ids salted by stage and plot."""
    _place_labels(canvas.figure)
    out = StringIO()
    with matplotlib.rc_context({**RC, "svg.hashsalt": f"{salt}\x00{key}"}):
        canvas.print_svg(out, metadata={"Date": None, "Creator": None, "Format": None,
                                        "Type": None})
    text = _METADATA.sub("", _PREAMBLE.sub("", out.getvalue(), count=1), count=1)
    opening = text.index(">") + 1
    head = text[:opening].replace("<svg ", '<svg role="img" aria-label="'
                                  + str(escape(title)) + '" ', 1)
    return (head + f"\n <title>{escape(title)}</title>\n <desc>{escape(alt)}</desc>"
            + text[opening:])


TITLE_CHARACTERS = 84  # what fits across the figure in the title's size
DETAIL_CHARACTERS = 110


def _fit(text: str, characters: int) -> str:
    """``text`` shortened to ``characters`` (the caption keeps it whole)."""
    return text if len(text) <= characters else text[:characters - 1].rstrip() + "…"


def _heading(figure, ax, title: str, detail: str) -> None:
    """The plot's title (bold, at the figure's top left) and its figures in a line
    below it, over the axes."""
    height = figure.get_figheight()
    figure.text(0.012, 1 - 0.06 / height, _fit(title, TITLE_CHARACTERS), fontsize=9.5,
                fontweight="bold", va="top", ha="left")
    detail = _fit(detail, DETAIL_CHARACTERS)
    ax.set_title(detail, fontsize=8, fontweight="normal", loc="left", pad=4, y=1.0)


def _top(figure) -> float:
    """The axes' top edge (figure fraction) that leaves room for the heading."""
    return 1 - 0.5 / figure.get_figheight()


def _frequency_axis(ax, low: float, high: float) -> None:
    ax.set_xscale("log")
    ax.set_xlim(low, high)
    decades = math.log10(high / low)
    ax.xaxis.set_major_locator(LogLocator(base=10, numticks=min(8, int(decades) + 2)))
    ax.xaxis.set_minor_locator(NullLocator())
    ax.xaxis.set_major_formatter(EngFormatter(unit="Hz", sep=" "))
    ax.xaxis.set_minor_formatter(NullFormatter())


def _db(values: np.ndarray) -> np.ndarray:
    with np.errstate(divide="ignore"):
        return 20 * np.log10(np.maximum(np.abs(values), 1e-300))


def _hz(value: float | None) -> str:
    return format_si(value, "Hz") if value is not None else "none"


# -- loop gain -----------------------------------------------------------------------------
def _margins_text(margins) -> str:
    parts = []
    if margins.crossover_hz is not None:
        parts.append(f"crossover {_hz(margins.crossover_hz)}")
    if margins.phase_margin_deg is not None:
        parts.append(f"phase margin {margins.phase_margin_deg:.1f}°")
    if margins.gain_margin_db is not None:
        parts.append(f"gain margin {margins.gain_margin_db:.1f} dB at"
                     f" {_hz(margins.phase_crossover_hz)}")
    return ", ".join(parts) or "no crossover"


def _loop_plots(stage, figures, findings, settings_of, salt):
    loops, notes = views.loop_views(stage, figures, findings)
    return [draw_loop(view, salt) for view in loops], notes


def draw_loop(view: views.LoopView, salt: str) -> Plot:
    """Magnitude and phase of an op-amp's loop gain T, crossover and margins marked,
    the loops with its stability fixes overlaid."""
    curve = view.curve
    margins = curve.margins
    title = f"Loop gain of {view.ref}"
    with _drawing("loop", 4.3, rows=2) as (figure, canvas, (mag, phase)):
        curves = (curve,) + view.fixes
        low = min(float(c.frequencies_hz[0]) for c in curves)
        high = max(float(c.frequencies_hz[-1]) for c in curves)
        top, bottom = -math.inf, math.inf  # curves holds at least the stage's own loop
        phase_low, phase_high = math.inf, -math.inf
        for k, c in enumerate(curves):
            db = _db(c.loop_gain)
            degrees = unwrapped_phase_deg(c.loop_gain)
            label = c.label if k else f"{view.ref} as drawn"
            label += f": PM {c.margins.phase_margin_deg:.1f}°" \
                if c.margins.phase_margin_deg is not None else ""
            style = dict(color=SERIES[k], linestyle=STYLES[k], linewidth=1.6 if k == 0 else 1.3)
            mag.plot(c.frequencies_hz, db, label=label, **style)
            phase.plot(c.frequencies_hz, degrees, **style)
            top = max(top, float(np.max(db)))
            bottom = min(bottom, float(np.min(db)))
            phase_low = min(phase_low, float(np.min(degrees)))
            phase_high = max(phase_high, float(np.max(degrees)))
        top = max(top, 20.0)
        bottom = min(max(bottom, top - 200.0, -120.0), -40.0)
        mag.set_ylim(bottom - 5, top + 10)
        mag.axhline(0.0, color=LIMIT, linestyle="--", linewidth=0.8)
        phase.axhline(-180.0, color=LIMIT, linestyle="--", linewidth=0.8)
        phase.set_ylim(min(phase_low, -200.0) - 10, max(phase_high, 0.0) + 10)
        phase.yaxis.set_major_locator(MultipleLocator(90 if phase_high - phase_low < 540
                                                      else 180))
        mag.yaxis.set_major_locator(MaxNLocator(6))
        _frequency_axis(phase, low, high)
        if margins.crossover_hz is not None:
            fc = margins.crossover_hz
            for ax in (mag, phase):
                ax.axvline(fc, color=SERIES[0], linestyle=":", linewidth=0.8)
            mag.plot([fc], [0.0], marker="o", markersize=4, color=SERIES[0])
            mag.annotate(f"crossover {_hz(fc)}", (fc, 0.0), xytext=(4, 5),
                         textcoords="offset points", fontsize=7.5)
            if margins.phase_margin_deg is not None:
                at = margins.phase_margin_deg - 180.0
                phase.annotate("", xy=(fc, at), xytext=(fc, -180.0),
                               arrowprops=dict(arrowstyle="<->", color=SERIES[0], lw=0.9))
                phase.annotate(f"phase margin {margins.phase_margin_deg:.1f}°",
                               (fc, (at - 180.0) / 2), xytext=(5, 0),
                               textcoords="offset points", fontsize=7.5, va="center")
        if margins.gain_margin_db is not None and margins.phase_crossover_hz is not None:
            fp, gm = margins.phase_crossover_hz, margins.gain_margin_db
            mag.annotate("", xy=(fp, -gm), xytext=(fp, 0.0),
                         arrowprops=dict(arrowstyle="<->", color=SERIES[1], lw=0.9))
            mag.annotate(f"gain margin {gm:.1f} dB", (fp, -gm / 2), xytext=(5, 0),
                         textcoords="offset points", fontsize=7.5, va="center")
        _heading(figure, mag, title, _margins_text(margins))
        mag.set_ylabel("|T| (dB)")
        phase.set_ylabel("phase of T (°)")
        phase.set_xlabel("frequency")
        if view.fixes:
            mag.legend(loc="upper right")
        figure.subplots_adjust(left=0.1, right=0.96, top=_top(figure), bottom=0.1,
                               hspace=0.08)
        alt = (f"Bode plot of {view.ref}'s loop gain T from {_hz(low)} to {_hz(high)}:"
               f" {_margins_text(margins)}, at DC {float(_db(curve.loop_gain[:1])[0]):.1f} dB.")
        for fix in view.fixes:
            alt += f" {fix.label.capitalize()}: {_margins_text(fix.margins)}."
        svg = _svg(canvas, salt, f"loop-{view.ref}", title, alt)
    return Plot("loop", f"loop-{view.ref}", title, alt, svg)


# -- closed-loop response --------------------------------------------------------------------
def _response_plots(stage, figures, findings, settings_of, salt):
    responses, notes = views.response_views(stage, figures)
    return [draw_response(view, k, salt) for k, view in enumerate(responses)], notes


def draw_response(view: views.ResponseView, index: int, salt: str) -> Plot:
    """The signal's gain over frequency, the sources' band and the required gain window
    shaded, the required bandwidth and the -3 dB edges marked."""
    title = f"Closed-loop response from {view.label}"
    voltage = view.unit == "V/V"
    with _drawing("response", 3.0) as (figure, canvas, (ax,)):
        f = view.frequencies_hz
        magnitude = np.abs(view.response)
        values = _db(magnitude) if voltage else magnitude
        _frequency_axis(ax, float(f[0]), float(f[-1]))
        ax.set_yscale("linear" if voltage else "log")
        if not voltage:
            ax.yaxis.set_major_formatter(EngFormatter(unit="Ω", sep=" "))
            ax.yaxis.set_minor_formatter(NullFormatter())
        if view.band is not None:
            ax.axvspan(view.band[0] or float(f[0]), view.band[1], color=BAND, linewidth=0,
                       label="the sources' band")
        ax.plot(f, values, color=SERIES[0], linewidth=1.6, label="gain from the source")
        peak = float(np.max(values))
        if voltage:
            ax.set_ylim(max(float(np.min(values)), peak - 80.0) - 3, peak + 8)
        else:
            ax.set_ylim(max(float(np.min(values)), peak * 1e-4) / 2, peak * 3)
        if view.gain_window is not None:
            lo, hi = (_db(np.array(view.gain_window)) if voltage else view.gain_window)
            ax.axhspan(lo, hi, facecolor=WINDOW, edgecolor=LIMIT, hatch="////",
                       linewidth=0.6, label="required gain window", zorder=1)
        if view.required_bandwidth_hz:
            ax.axvline(view.required_bandwidth_hz, color=LIMIT, linestyle="--", linewidth=0.9,
                       label=f"required bandwidth {_hz(view.required_bandwidth_hz)}")
        for edge in view.edges:
            if edge is not None:
                ax.axvline(edge, color=SERIES[1], linestyle=":", linewidth=0.9)
                ax.annotate(f"−3 dB {_hz(edge)}", (edge, peak), xytext=(3, -10),
                            textcoords="offset points", fontsize=7.5, color=SERIES[1])
        mid = _at(f, magnitude, view.reference_hz)
        gain_text = (f"{mid:.4g} ({float(_db(np.array([mid]))[0]):.1f} dB)" if voltage
                     else format_si(mid, "Ω"))
        _heading(figure, ax, title, f"gain {gain_text}"
                 f"{' at ' + _hz(view.reference_hz) if view.reference_hz > 0 else ' at DC'}"
                 f", −3 dB at {_hz(view.edges[1])}")
        ax.set_ylabel("|gain| (dB)" if voltage else "|transimpedance|")
        ax.set_xlabel("frequency")
        ax.legend(loc="lower left")
        figure.subplots_adjust(left=0.1, right=0.96, top=_top(figure), bottom=0.16)
        alt = (f"Magnitude of the gain from {view.label} to the output from {_hz(f[0])} to"
               f" {_hz(f[-1])}: {gain_text} at"
               f" {_hz(view.reference_hz) if view.reference_hz > 0 else 'DC'}; -3 dB edges"
               f" {_hz(view.edges[0])} and {_hz(view.edges[1])}")
        if view.band is not None:
            alt += f"; the sources' band {_hz(view.band[0] or 0.0)} to {_hz(view.band[1])}"
        if view.gain_window is not None:
            alt += (f"; the required gain window {view.gain_window[0]:.4g} to"
                    f" {view.gain_window[1]:.4g}")
        if view.required_bandwidth_hz:
            alt += f"; required bandwidth {_hz(view.required_bandwidth_hz)}"
        svg = _svg(canvas, salt, f"response-{index}", title, alt + ".")
    return Plot("response", f"response-{index}", title, alt + ".", svg)


def _at(frequencies: np.ndarray, values: np.ndarray, frequency: float) -> float:
    if frequency <= 0:
        return float(values[0])
    return float(values[int(np.argmin(np.abs(frequencies - frequency)))])


# -- output range ----------------------------------------------------------------------------
def _range_plots(stage, figures, findings, settings_of, salt):
    view, notes = views.range_view(stage, figures)
    return ([draw_range(view, salt)] if view is not None and view.rows else []), notes


def draw_range(view: views.RangeView, salt: str) -> Plot:
    """Each op-amp output's DC range (with offset and bias errors) as a bar against its
    usable swing and its rails."""
    title = "Output range against the usable swing and the rails"
    rows = len(view.rows)
    with _drawing(f"range{rows}", 1.5 + 0.5 * rows) as (figure, canvas, (ax,)):
        lows = [r.rail_low for r in view.rows]
        highs = [r.rail_high for r in view.rows]
        span = max(highs) - min(lows) or 1.0
        parts = []
        for k, r in enumerate(view.rows):
            y = rows - 1 - k
            ax.barh(y, r.rail_high - r.rail_low, left=r.rail_low, height=0.7, color=RAIL,
                    label="rails" if k == 0 else None)
            if r.clip_low is not None and r.clip_high is not None:
                ax.barh(y, r.clip_high - r.clip_low, left=r.clip_low, height=0.5,
                        color=BAND, edgecolor=SERIES[0], linewidth=0.5,
                        label="usable swing" if k == 0 else None)
            ax.barh(y, r.high - r.low, left=r.low, height=0.26, color=SERIES[2],
                    label="with offset and bias errors" if k == 0 else None)
            ax.barh(y, max(r.nominal_high - r.nominal_low, span * 2e-3),
                    left=r.nominal_low if r.nominal_high > r.nominal_low else
                    r.nominal_low - span * 1e-3, height=0.26, color=SERIES[0],
                    label="output range" if k == 0 else None)
            clipped = (r.clip_low is not None and r.low < r.clip_low) or \
                (r.clip_high is not None and r.high > r.clip_high)
            parts.append(f"{r.label}: {format_si(r.low, 'V')} to {format_si(r.high, 'V')}"
                         f" (nominal {format_si(r.nominal_low, 'V')} to"
                         f" {format_si(r.nominal_high, 'V')}), usable"
                         f" {format_si(r.clip_low, 'V')} to {format_si(r.clip_high, 'V')},"
                         f" rails {format_si(r.rail_low, 'V')} and"
                         f" {format_si(r.rail_high, 'V')}" + (", clips" if clipped else ""))
            # node_range sets both clip ends or neither
            if view.required_headroom_v and r.clip_low is not None and r.clip_high is not None:
                for edge in (r.clip_low + view.required_headroom_v,
                             r.clip_high - view.required_headroom_v):
                    ax.plot([edge, edge], [y - 0.35, y + 0.35], color=LIMIT, linestyle="--",
                            linewidth=0.9)
        ax.set_yticks(range(rows), [r.label for r in reversed(view.rows)])
        ax.set_ylim(-0.6, rows - 0.4)
        ax.set_xlim(min(lows + [r.low for r in view.rows]) - 0.04 * span,
                    max(highs + [r.high for r in view.rows]) + 0.04 * span)
        ax.xaxis.set_major_formatter(EngFormatter(unit="V", sep=" "))
        ax.xaxis.set_major_locator(MaxNLocator(8))
        _heading(figure, ax, title, "; ".join(
            f"{r.label} {format_si(r.low, 'V')} to {format_si(r.high, 'V')}"
            for r in view.rows))
        height = figure.get_figheight()
        ax.legend(loc="lower center", bbox_to_anchor=(0.5, 0.0), ncol=4,
                  bbox_transform=figure.transFigure)
        figure.subplots_adjust(left=0.14, right=0.96, top=_top(figure),
                               bottom=0.75 / height)
        alt = "Bar chart of the output range: " + "; ".join(parts) + "."
        if view.required_headroom_v:
            alt += f" Required headroom {format_si(view.required_headroom_v, 'V')}."
        svg = _svg(canvas, salt, "range", title, alt)
    return Plot("range", "range", title, alt, svg)


# -- noise -------------------------------------------------------------------------------------
def _noise_plots(stage, figures, findings, settings_of, salt):
    view, notes = views.noise_view(stage, figures,
                                   settings_of("noise").get("temperature_k", 300.0))
    return ([draw_noise(view, salt)] if view is not None else []), notes


def draw_noise(view: views.NoiseView, salt: str) -> Plot:
    """The output noise density, the band shaded, the integrated value and the largest
    contributors."""
    title = "Output noise density"
    band = f"{_hz(view.band[0])} to {_hz(view.band[1])}"
    with _drawing("noise", 3.0) as (figure, canvas, (ax,)):
        f = view.frequencies_hz
        _frequency_axis(ax, float(f[0]), float(f[-1]))
        ax.set_yscale("log")
        ax.yaxis.set_major_formatter(EngFormatter(unit="V/√Hz", sep=" "))
        ax.yaxis.set_minor_formatter(NullFormatter())
        ax.yaxis.set_major_locator(LogLocator(base=10, numticks=6))
        ax.yaxis.set_minor_locator(NullLocator())
        ax.axvspan(view.band[0] or float(f[0]), view.band[1], color=BAND, linewidth=0,
                   label=f"noise band, {format_si(view.total_vrms, 'V')} rms")
        ax.plot(f, view.total, color=SERIES[0], linewidth=1.6, label="total")
        for k, (name, vrms, density) in enumerate(view.contributors):
            ax.plot(f, density, color=SERIES[k + 1], linestyle=STYLES[k + 1], linewidth=1.1,
                    label=f"{name}: {format_si(vrms, 'V')} rms")
        floor = float(np.min(view.total[view.total > 0])) if np.any(view.total > 0) else 1e-9
        ax.set_ylim(floor / 30, float(np.max(view.total)) * 3)
        required = (f", required ≤ {format_si(view.required_vrms, 'V')} rms"
                    if view.required_vrms else "")
        _heading(figure, ax, title, f"{format_si(view.total_vrms, 'V')} rms over"
                 f" {band}{required}")
        ax.set_ylabel("noise density")
        ax.set_xlabel("frequency")
        ax.legend(loc="lower left")
        figure.subplots_adjust(left=0.13, right=0.96, top=_top(figure), bottom=0.16)
        alt = (f"Output noise density from {_hz(f[0])} to {_hz(f[-1])}; integrated over the"
               f" band {band}: {format_si(view.total_vrms, 'V')} rms{required}. Largest"
               " contributors: " + ("; ".join(f"{name} {format_si(vrms, 'V')} rms"
                                               for name, vrms, _d in view.contributors)
                                     or "none") + ".")
        if view.missing:
            alt += f" No noise density given for {', '.join(view.missing)}."
        svg = _svg(canvas, salt, "noise", title, alt)
    return Plot("noise", "noise", title, alt, svg)


# -- spread ------------------------------------------------------------------------------------
def _spread_plots(stage, figures, findings, settings_of, salt):
    spreads = views.spread_views(stage, figures, findings, settings_of)
    return [draw_spread(view, k, salt) for k, view in enumerate(spreads)], []


def draw_spread(view: views.SpreadView, index: int, salt: str) -> Plot:
    """A histogram of the Monte Carlo boards, the allowed window's edges, the nominal
    and the worst case marked."""
    gain = view.quantity == "gain"
    title = (f"Gain from {view.label} over the resistors' tolerances" if gain
             else f"Common-mode rejection of {view.label} over the resistors' tolerances")
    samples = view.samples[np.isfinite(view.samples)]
    with _drawing("spread", 2.8) as (figure, canvas, (ax,)):
        marks = [view.nominal, view.worst] + [v for v in view.limits if v is not None]
        marks = [m for m in marks if math.isfinite(m)]
        low = min([float(np.min(samples))] + marks) if samples.size else min(marks)
        high = max([float(np.max(samples))] + marks) if samples.size else max(marks)
        pad = (high - low) * 0.08 or abs(high) * 0.01 or 1.0
        ax.set_xlim(low - pad, high + pad)
        counts = np.zeros(1)
        if samples.size:
            counts, _edges, _patches = ax.hist(samples, bins=40, histtype="stepfilled",
                                               color=BAND, edgecolor=SERIES[0],
                                               linewidth=1.0, label=f"{samples.size} boards")
        ax.set_ylim(0, max(float(np.max(counts)), 1.0) * 1.25)
        unit = "" if gain else " dB"
        for value in view.limits:
            if value is not None:
                ax.axvline(value, color=LIMIT, linestyle="--", linewidth=1.0)
        lo, hi = view.limits
        if lo is not None:
            ax.axvspan(low - pad, lo, color=DANGER, linewidth=0, zorder=0)
        if hi is not None:
            ax.axvspan(hi, high + pad, color=DANGER, linewidth=0, zorder=0)
        ax.axvline(view.nominal, color=SERIES[0], linewidth=1.2, label="nominal")
        ax.axvline(view.worst, color=SERIES[2], linestyle="-.", linewidth=1.2,
                   label=f"{view.worst_how} {view.worst:.4g}{unit}")
        window = " to ".join(f"{v:.4g}{unit}" for v in view.limits if v is not None)
        allowed = f"allowed {window}" if hi is not None and lo is not None else \
            f"limit {window}"
        _heading(figure, ax, title, f"{view.worst_how} {view.worst:.4g}{unit}, {allowed}")
        ax.set_xlabel("gain (V/V)" if gain else "CMRR (dB)")
        ax.set_ylabel("boards")
        ax.yaxis.set_major_locator(MaxNLocator(5, integer=True))
        ax.legend(loc="upper right")
        figure.subplots_adjust(left=0.1, right=0.96, top=_top(figure), bottom=0.17)
        alt = (f"Histogram of {samples.size} Monte Carlo boards, each resistor uniform within"
               f" its tolerance: {'gain' if gain else 'CMRR'} from {float(np.min(samples)):.4g}"
               f" to {float(np.max(samples)):.4g}{unit}, nominal {view.nominal:.4g}{unit},"
               f" {view.worst_how} {view.worst:.4g}{unit}; {allowed}."
               if samples.size else f"No resistor moves it; nominal {view.nominal:.4g}{unit}.")
        svg = _svg(canvas, salt, f"spread-{index}", title, alt)
    return Plot("spread", f"spread-{index}", title, alt, svg)


# -- poles ---------------------------------------------------------------------------------------
def _pole_plots(stage, figures, findings, settings_of, salt):
    view = views.pole_view(figures)
    if not view.poles.size:
        return [], ["the stage has no natural frequency to draw"]
    return [draw_poles(view, salt)], []


def draw_poles(view: views.PoleView, salt: str) -> Plot:
    """The stage's natural frequencies in the s-plane (σ and ω over 2π, in Hz, on
    symmetric log scales), the right half-plane shaded."""
    title = "Natural frequencies (pole map)"
    sigma = view.poles.real / (2 * math.pi)
    omega = view.poles.imag / (2 * math.pi)
    with _drawing("poles", 3.2) as (figure, canvas, (ax,)):
        magnitudes = np.abs(view.poles) / (2 * math.pi)
        smallest = float(np.min(magnitudes[magnitudes > 0])) if np.any(magnitudes > 0) else 1.0
        largest = float(np.max(magnitudes)) if magnitudes.size else 1.0
        low = math.floor(math.log10(smallest / 3))
        high = math.ceil(math.log10(largest * 1.5))
        threshold, reach = 10.0 ** low, 10.0 ** high
        stride = max(1, math.ceil((high - low) / 3))  # at most four decades marked a side
        decades = [10.0 ** k for k in range(high, low, -stride)]
        ticks = [-d for d in decades] + [0.0] + decades[::-1]
        for axis in ("x", "y"):
            getattr(ax, f"set_{axis}scale")("symlog", linthresh=threshold, linscale=0.5)
            axis_obj = getattr(ax, f"{axis}axis")
            axis_obj.set_major_locator(FixedLocator(ticks))
            axis_obj.set_minor_locator(NullLocator())
            axis_obj.set_major_formatter(EngFormatter(unit="Hz", sep=" "))
        ax.set_xlim(-reach, reach)
        ax.set_ylim(-reach, reach)
        ax.axvspan(0, reach, color=DANGER, linewidth=0, zorder=0,
                   label="right half-plane (growing)")
        ax.axvline(0, color="#444444", linewidth=0.6)
        ax.axhline(0, color="#444444", linewidth=0.6)
        ax.plot(sigma, omega, linestyle="none", marker="x", markersize=6, markeredgewidth=1.4,
                color=SERIES[0], label="natural frequency")
        ax.legend(loc="lower right")  # on the right half-plane, where stable poles are not
        state = "stable" if view.stable else "UNSTABLE"
        text = state
        if view.dominant is not None:
            frequency, damping = view.dominant
            text += f"; least damped pair {format_si(frequency, 'Hz')}, ζ {damping:.2f}"
        _heading(figure, ax, title, text)
        ax.set_xlabel("σ/2π (real part)")
        ax.set_ylabel("ω/2π (imaginary part)")
        figure.subplots_adjust(left=0.13, right=0.96, top=_top(figure), bottom=0.15)
        listed = ", ".join(f"{format_si(s, 'Hz')} {'+' if w >= 0 else '−'} j{format_si(abs(w), 'Hz')}"
                           for s, w in zip(sigma[:12], omega[:12]))
        alt = (f"Pole map of the stage's {view.poles.size} natural frequencies (over 2π):"
               f" {listed}{' …' if view.poles.size > 12 else ''}; {text}.")
        svg = _svg(canvas, salt, "poles", title, alt)
    return Plot("poles", "poles", title, alt, svg)


DRAW = {"loop": _loop_plots, "response": _response_plots, "range": _range_plots,
        "noise": _noise_plots, "spread": _spread_plots, "poles": _pole_plots}
