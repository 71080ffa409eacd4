"""The one table of options: each configuration key and its command-line flag, with
its type, unit, default, allowed values and description.

The configuration reader (checker.config) checks values against it, the ``check``
command takes its flags' help from it, ``ampcheck config`` prints it and the key table
of docs/configuration.md is made from it (``options_markdown``; a test compares).

Rule settings are declared the same way: a rule names its settings in ``@rule(...)``
with their defaults, and ``rule_settings(rule)`` gives each a Setting with its
configuration key (kebab-case) and its unit, read from the name's ending (``_deg``
degrees, ``_ohm`` ohms, ``_db`` decibels, ``_v`` volts, ``_a`` amperes, ``_w`` watts,
``_k`` kelvin; no ending: a plain number or ratio). Every key is kebab-case; the
snake_case spelling of a rule setting (``warn_below_deg``) is still read, with a
deprecation note naming the new key.
"""

from __future__ import annotations

import math
import re
from checker.record import record
from typing import TypeGuard

from checker.units import UnitError, check_plausible, parse_value


@record(frozen=True)
class Option:
    """One configuration key (and, where it has one, its ``check`` flag)."""

    name: str  # the configuration key, kebab-case
    type: str  # "choice", "rule-ids", "paths", "path", "globs", "quantity", "count", "number"
    default: object  # shown by `ampcheck config` and the docs
    description: str
    unit: str = ""  # a units.QUANTITIES kind for "quantity", else a word ("seconds")
    allowed: tuple[str, ...] = ()  # for "choice"
    run_wide: bool = False  # taken from the working folder's configuration
    in_overrides: bool = False  # may appear in [[overrides]]
    flag: str = ""  # the `check` option that overrides it, "" when none
    default_text: str = ""  # how the docs and `config` show the default


OPTIONS: tuple[Option, ...] = (
    Option("fail-on", "choice", "error",
           "exit 1 when an unwaived, unbaselined finding reaches this severity (an"
           " unacknowledged safety caution counts as a warning)",
           allowed=("error", "warning", "info", "never"), run_wide=True, flag="--fail-on"),
    Option("select", "rule-ids", None, "run only these rules", in_overrides=True,
           flag="--select", default_text="every rule"),
    Option("ignore", "rule-ids", frozenset(), "skip these rules", in_overrides=True,
           flag="--ignore", default_text="none"),
    Option("exclude", "globs", (), "paths not checked when a folder is searched (glob"
           " patterns on forward-slash paths relative to the configuration file, or to"
           " the working folder for --exclude; a pattern also matches any folder level)",
           flag="--exclude", default_text="none"),
    Option("rules-dirs", "paths", (), "folders of user rules, relative to the file; Python"
           " code, so loaded only with --trust-config-rules or AMPCHECK_TRUST_CONFIG_RULES=1",
           flag="--rules-dir", default_text="none"),
    Option("parts", "paths", (), "part-library files (.parts, .parts.json), relative to the"
           " file; their parts override the built-in classes", flag="--parts",
           default_text="none"),
    Option("netlist-map", "path", None, "the netlist map that cuts netlists into stages,"
           " relative to the file", flag="--netlist-map", default_text="none"),
    Option("stray-capacitance", "quantity", 1e-12, "capacitance added at every op-amp's"
           " inverting input in the analysis (layout stray, common practice 0.5 to 2 pF)",
           unit="capacitance", in_overrides=True, flag="--stray-capacitance",
           default_text="1p"),
    Option("jobs", "count", 0, "worker processes for `check`, 0 for one per CPU",
           run_wide=True, flag="--jobs", default_text="one per CPU"),
    Option("time-budget", "number", 60.0, "seconds one file's review may take, 0 for no"
           " limit", unit="seconds", run_wide=True, flag="--time-budget", default_text="60"),
    Option("memory-limit", "number", 1024.0, "megabytes one file's review may add to its"
           " process, 0 for no cap (Linux)", unit="megabytes", run_wide=True,
           flag="--memory-limit", default_text="1024"),
    Option("worst", "count", 5, "files and stages named in the worst lists of a"
           " several-file text summary, 0 to leave the lists out", run_wide=True,
           flag="--worst", default_text="5"),
)
BY_NAME = {option.name: option for option in OPTIONS}
# A layout's stray at an input is picofarads (common practice 0.5 to 2 pF); far beyond,
# it is a component, which belongs in the stage.
MAX_STRAY_F = 1e-9
STRAY_TOO_LARGE = "a layout stray is picofarads, 1 nF at the most; draw a capacitor that large"
TABLE_KEYS = ("rules", "overrides")  # the two tables besides the options


class OptionError(ValueError):
    """A value that does not fit its option; the message names the key."""


def parse_option(option: Option, value: object, known_rules=()) -> object:
    """Check one configuration value against its option; the value to use."""
    name = option.name
    if option.type == "choice":
        if value not in option.allowed:
            raise OptionError(f"{name} must be one of {', '.join(option.allowed)}, not {value!r}")
        return value
    if option.type in ("rule-ids", "paths", "globs"):
        if not isinstance(value, list) or not all(isinstance(v, str) for v in value):
            word = {"rule-ids": "rule ids", "paths": "paths", "globs": "glob patterns"}
            raise OptionError(f"{name} is a list of {word[option.type]}")
        return frozenset(value) if option.type == "rule-ids" else list(value)
    if option.type == "path":
        if not isinstance(value, str) or not value:
            raise OptionError(f"{name} is the path of one file")
        return value
    if option.type == "quantity":
        try:
            number = parse_value(value, option.unit)
            check_plausible(number, option.unit, value)
        except UnitError as error:
            raise OptionError(f"{name}: {error}") from None
        if number < 0:
            raise OptionError(f"{name} cannot be negative")
        if name == "stray-capacitance" and number > MAX_STRAY_F:
            raise OptionError(f"{name}: {value!r} is no stray: {STRAY_TOO_LARGE}")
        return number
    if option.type == "count":
        if not isinstance(value, int) or isinstance(value, bool) or not 0 <= value <= 1024:
            zero = ", 0 for one per CPU" if name == "jobs" else ", 0 to leave the lists out"
            raise OptionError(f"{name} is a whole number from 0 to 1024{zero}")
        return value
    if isinstance(value, bool) or not isinstance(value, (int, float)) or \
            not math.isfinite(value) or not 0 <= value <= 1e9:
        raise OptionError(f"{name} is a number of {option.unit}, 0 for no limit")
    return float(value)


def help_for(flag: str) -> str:
    """The ``check`` flag's help text, from the option it overrides."""
    for option in OPTIONS:
        if option.flag == flag:
            default = option.default_text or str(option.default)
            return f"{option.description} (key {option.name}; default {default})"
    raise KeyError(flag)


# Rule settings ---------------------------------------------------------------------

UNIT_ENDINGS = {"_deg": ("angle", "°"), "_ohm": ("resistance", "Ω"), "_db": ("decibels", "dB"),
                "_v": ("voltage", "V"), "_a": ("current", "A"), "_w": ("power", "W"),
                "_k": ("temperature", "K")}


@record(frozen=True)
class Setting:
    """One rule setting: its name in the rule's code, its configuration key, its unit."""

    rule_id: str
    name: str  # as the rule reads it: view.settings[name]
    key: str  # the configuration key, kebab-case
    default: object
    kind: str  # a units.QUANTITIES kind, "decibels", "number" or "list"
    symbol: str = ""

    def parse(self, value: object) -> object:
        """A configured value as the rule reads it; OptionError when it does not fit."""
        where = f"{self.rule_id}.{self.key}"
        if self.kind == "list":
            if not isinstance(value, list) or not all(_is_number(v) or isinstance(v, str)
                                                      for v in value):
                raise OptionError(f"{where} is a list of numbers, not {value!r}")
            return [_number(v, "number", where) for v in value]
        return _number(value, self.kind, where)

    def show(self, value: object) -> str:
        return format_setting(value, self.symbol)


def _is_number(value: object) -> TypeGuard[int | float]:
    return isinstance(value, (int, float)) and not isinstance(value, bool)


def _number(value: object, kind: str, where: str) -> float:
    if _is_number(value):
        try:
            number = float(value)
        except OverflowError:
            number = math.inf
        if not math.isfinite(number):
            raise OptionError(f"{where} must be a finite number")
        return number
    if not isinstance(value, str):
        raise OptionError(f"{where} must be a number, not {value!r}")
    text = value.strip()
    try:
        if kind == "decibels":
            match = re.fullmatch(r"([+-]?[\d.]+(?:[eE][+-]?\d+)?)\s*(?:dB)?", text)
            if not match:
                raise UnitError(f"expected decibels, e.g. \"6 dB\", got {value!r}")
            return _number(float(match.group(1)), "number", where)
        if kind == "number":
            if text.endswith("%"):
                return parse_value(text[:-1], "ratio") / 100.0
            return _plain(text)
        return parse_value(text, kind)
    except UnitError as error:
        raise OptionError(f"{where}: {error}") from None


def _plain(text: str) -> float:
    """A unitless value with an optional SI prefix ("10k", "1e-9", "0.5")."""
    from checker.units import PREFIXES

    match = re.fullmatch(r"([+-]?(?:\d+\.?\d*|\.\d+)(?:[eE][+-]?\d+)?)\s*([a-zA-Zµμ]?)", text)
    if not match or (match.group(2) and match.group(2) not in PREFIXES):
        raise UnitError(f"expected a number, got {text!r}")
    return float(match.group(1)) * (PREFIXES[match.group(2)] if match.group(2) else 1.0)


def setting_key(name: str) -> str:
    """The configuration key of a setting named ``name`` in a rule's code."""
    return name.replace("_", "-")


def rule_settings(rule) -> dict[str, Setting]:
    """The rule's settings declared as Settings, by configuration key."""
    result = {}
    for name, default in rule.settings.items():
        kind, symbol = "number", ""
        if isinstance(default, (list, tuple)):
            kind = "list"
        else:
            for ending, (unit_kind, unit_symbol) in UNIT_ENDINGS.items():
                if name.endswith(ending):
                    kind, symbol = unit_kind, unit_symbol
        result[setting_key(name)] = Setting(rule.id, name, setting_key(name), default, kind,
                                            symbol)
    return result


def format_setting(value: object, symbol: str = "") -> str:
    """A setting's value for people: numbers with %g and the unit, lists bracketed."""
    if isinstance(value, (list, tuple)):
        return "[" + ", ".join(format_setting(v, symbol) for v in value) + "]"
    if _is_number(value):
        text = f"{value:g}"
        return f"{text} {symbol}" if symbol else text
    return str(value)


# Docs -----------------------------------------------------------------------------

def options_markdown() -> str:
    """The key table of docs/configuration.md."""
    lines = ["| key | type | unit | default | allowed | flag | meaning |",
             "|---|---|---|---|---|---|---|"]
    for option in OPTIONS:
        default = option.default_text or str(option.default)
        allowed = ", ".join(f"`{a}`" for a in option.allowed)
        unit = option.unit
        flag = f"`{option.flag}`" if option.flag else ""
        lines.append(f"| `{option.name}` | {option.type} | {unit} | {default} | {allowed}"
                     f" | {flag} | {option.description} |")
    return "\n".join(lines) + "\n"
