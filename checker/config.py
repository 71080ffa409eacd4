"""Project configuration: ``ampcheck.toml`` or ``[tool.ampcheck]`` in pyproject.toml.

For each checked file the closest configuration up the folder tree wins (no merging
across levels); the search stops at the repository root (the first folder holding
.git). Command-line options override it. Every value remembers where it came
from, so ``ampcheck config`` can show it, and every error names the file and line.

Keys (top level; the table of them, with types, units and defaults, is
checker.options.OPTIONS, which this reader checks values against):
    fail-on            "error" | "warning" | "info" | "never"
    select, ignore     lists of rule ids
    rules-dirs         folders of user rules (relative to the configuration file); they
                       are Python code, so they load only with --trust-config-rules or
                       AMPCHECK_TRUST_CONFIG_RULES=1
    parts              part-library files (relative to the configuration file)
    netlist-map        the netlist map for netlists (relative to the configuration file)
    stray-capacitance  a capacitance ("1p") added at every inverting input
    jobs               worker processes for `check` (0: one per CPU)
    time-budget        seconds one file's review may take (0: no limit)
    memory-limit       megabytes one file's review may add to its process (0: no cap)
    worst              files and stages in the text summary's worst lists (0: none)
    exclude            glob patterns of paths a folder search skips
    [rules.RULE-ID]    severity = "error" | "warning" | "info", and the rule's settings
    [[overrides]]      paths = [globs, relative to the file]; select, ignore,
                       stray-capacitance and [overrides.rules.RULE-ID] for those files
"""

from __future__ import annotations

import fnmatch
import os
import re
import sys
from dataclasses import field
from checker.record import record
from functools import lru_cache
from collections.abc import Callable
from typing import NoReturn

from checker.cautions import KINDS as CAUTION_KINDS
from checker.cautions import not_a_rule
from checker.findings import Severity
from checker.options import BY_NAME as OPTION_TABLE
from checker.options import TABLE_KEYS, OptionError, parse_option, rule_settings

CONFIG_FILE = "ampcheck.toml"
TOP_KEYS = set(OPTION_TABLE) | set(TABLE_KEYS)
TRUST_VARIABLE = "AMPCHECK_TRUST_CONFIG_RULES"
TRUST_FLAG = "--trust-config-rules"
MAX_CONFIG_BYTES = 1024 * 1024
OVERRIDE_KEYS = {o.name for o in OPTION_TABLE.values() if o.in_overrides} | {"paths", "rules"}
FAIL_ON = OPTION_TABLE["fail-on"].allowed


class ConfigError(Exception):
    """A configuration mistake, with the file and line of the key."""


@record(frozen=True)
class Valued:
    value: object
    origin: str  # "default", "command line", or "FILE:LINE"


@record
class Config:
    """A resolved configuration: each value with its origin."""

    path: str | None = None  # the file it came from, None for defaults only
    values: dict[str, Valued] = field(default_factory=dict)
    rules: dict[str, dict[str, Valued]] = field(default_factory=dict)  # id -> key -> value
    overrides: list[dict] = field(default_factory=list)  # {"paths", "values", "rules"}

    def get(self, key: str, default=None):
        item = self.values.get(key)
        return default if item is None else item.value

    def for_file(self, path: str) -> Config:
        """This configuration with the overrides whose globs match ``path`` applied."""
        if not self.overrides or self.path is None:
            return self
        base = os.path.dirname(os.path.abspath(self.path))
        relative = os.path.relpath(os.path.abspath(path), base).replace(os.sep, "/")
        result = Config(self.path, dict(self.values),
                        {k: dict(v) for k, v in self.rules.items()}, [])
        for override in self.overrides:
            if any(fnmatch.fnmatch(relative, pattern) for pattern in override["paths"]):
                result.values.update(override["values"])
                for rule_id, settings in override["rules"].items():
                    result.rules.setdefault(rule_id, {}).update(settings)
        return result


def matches_any(path: str, base: str, patterns) -> bool:
    """True when a glob of ``patterns`` matches ``path`` relative to ``base`` (forward
    slashes), or any trailing part of it from a folder boundary ("build/*" matches
    "a/build/x.stage")."""
    relative = os.path.relpath(os.path.abspath(path), base).replace(os.sep, "/")
    parts = relative.split("/")
    tails = ["/".join(parts[i:]) for i in range(len(parts))]
    return any(fnmatch.fnmatch(tail, pattern.rstrip("/")) or
               fnmatch.fnmatch(tail, pattern.rstrip("/") + "/*")
               for pattern in patterns for tail in tails)


def _key_lines(text: str) -> dict[tuple, int]:
    """Line of each key, by (table path..., key): a light scan, as tomllib keeps none."""
    lines: dict[tuple, int] = {}
    table: tuple = ()
    override_count = 0
    for number, line in enumerate(text.splitlines(), start=1):
        stripped = line.strip()
        header = re.match(r"^\[\[\s*([^\]]+?)\s*\]\]", stripped)
        if header:
            name = tuple(p.strip().strip('"') for p in header.group(1).split("."))
            if name[-1] == "overrides":
                override_count += 1
                table = name[:-1] + ("overrides", override_count - 1)
            else:
                table = name
            lines[table] = number
            continue
        header = re.match(r"^\[\s*([^\]]+?)\s*\]", stripped)
        if header:
            parts = tuple(p.strip().strip('"') for p in header.group(1).split("."))
            if "overrides" in parts and override_count:
                i = parts.index("overrides")
                parts = parts[:i + 1] + (override_count - 1,) + parts[i + 1:]
            table = parts
            lines[table] = number
            continue
        key = re.match(r'^("?[A-Za-z0-9_.\-+]+"?)\s*=', stripped)
        if key:
            lines[table + (key.group(1).strip('"'),)] = number
    return lines


def _read(path: str) -> tuple[dict, dict[tuple, int], tuple] | None:
    """(table, key lines, prefix) of a config file; None when it has no ampcheck part."""
    if sys.version_info >= (3, 11):  # imported here: most runs read no configuration
        import tomllib
    else:  # pragma: no cover - Python 3.10
        import tomli as tomllib
    try:
        if not os.path.isfile(path):
            raise ConfigError(f"{path}: not a regular file")
        with open(path, "rb") as handle:
            data = handle.read(MAX_CONFIG_BYTES + 1)
        if len(data) > MAX_CONFIG_BYTES:
            raise ConfigError(f"{path}: larger than {MAX_CONFIG_BYTES // 1024} KiB; not a"
                              " configuration file")
        if data.startswith(b"\xef\xbb\xbf"):  # a UTF-8 byte order mark, as stage files allow
            data = data[3:]
        text = data.decode("utf-8")
        table = tomllib.loads(text)
    except tomllib.TOMLDecodeError as error:
        raise ConfigError(f"{path}: invalid TOML: {error}") from None
    except UnicodeDecodeError:
        raise ConfigError(f"{path}: cannot read: not UTF-8 text (save it as UTF-8)") from None
    except OSError as error:
        raise ConfigError(f"{path}: cannot read: {error}") from None
    lines = _key_lines(text)
    if os.path.basename(path) == "pyproject.toml":
        section = table.get("tool", {}).get("ampcheck")
        if section is None:
            return None
        return section, lines, ("tool", "ampcheck")
    return table, lines, ()


def trusted_by_environment() -> bool:
    """True when AMPCHECK_TRUST_CONFIG_RULES is set to 1, yes or true."""
    return os.environ.get(TRUST_VARIABLE, "").strip().lower() in ("1", "yes", "true")


def parse_config(path: str, rules_for, trust_rules: bool = False) -> Config:
    """Read and check one configuration file. ``rules_for(folders)`` returns the rules
    known with those user rule folders (the file's own ``rules-dirs``), which are only
    loaded when ``trust_rules`` (they run Python code); otherwise a file that names
    any is a ConfigError."""
    found = _read(path)
    if found is None:
        return Config()
    table, lines, prefix = found
    base = os.path.dirname(os.path.abspath(path))

    def where(*keys) -> str:
        line = lines.get(prefix + keys) or lines.get(prefix + keys[:-1]) or 1
        return f"{path}:{line}"

    def fail(keys: tuple, message: str) -> NoReturn:
        raise ConfigError(f"{where(*keys)}: {message}")

    folders = table.get("rules-dirs", [])
    if folders and not trust_rules:
        fail(("rules-dirs",), "rules-dirs names folders of Python rules, and a configuration"
             f" file runs no code unless asked: pass {TRUST_FLAG} (or set"
             f" {TRUST_VARIABLE}=1) to load them, or --no-config to ignore this file")
    if isinstance(folders, list) and all(isinstance(f, str) for f in folders):
        known_rules = rules_for(tuple(os.path.normpath(os.path.join(base, f))
                                      for f in folders))
    else:
        known_rules = rules_for(())

    config = Config(path)
    for key in table:
        if key not in TOP_KEYS:
            fail((key,), _unknown(key, TOP_KEYS))
    config.values = _values(table, (), where, fail, base, known_rules, top=True)
    config.rules = _rule_tables(table.get("rules", {}), ("rules",), where, fail, known_rules)
    overrides = table.get("overrides", [])
    if not isinstance(overrides, list):
        fail(("overrides",), "overrides is a list of tables: write [[overrides]]")
    for i, override in enumerate(overrides):
        keys = ("overrides", i)
        for key in override:
            if key not in OVERRIDE_KEYS:
                fail(keys + (key,), _unknown(key, OVERRIDE_KEYS))
        paths = override.get("paths")
        if not isinstance(paths, list) or not paths or not all(isinstance(p, str) for p in paths):
            fail(keys + ("paths",), "each [[overrides]] needs paths = [\"glob\", ...]")
        config.overrides.append({
            "paths": paths,
            "values": _values(override, keys, where, fail, base, known_rules, top=False),
            "rules": _rule_tables(override.get("rules", {}), keys + ("rules",), where, fail,
                                  known_rules),
        })
    return config


def _unknown(key: str, allowed) -> str:
    import difflib

    close = difflib.get_close_matches(key, sorted(allowed), n=1)
    hint = f"; did you mean {close[0]!r}?" if close else f"; known keys: {', '.join(sorted(allowed))}"
    return f"unknown key {key!r}{hint}"


def _values(table: dict, keys: tuple, where, fail, base: str, known_rules, top: bool) -> dict:
    """The option values of one table, checked against checker.options.OPTIONS."""
    values: dict[str, Valued] = {}
    for key, value in table.items():
        if key in ("rules", "overrides", "paths"):
            continue
        origin = where(*keys, key)
        option = OPTION_TABLE[key]
        try:
            value = parse_option(option, value, known_rules)
        except OptionError as error:
            fail(keys + (key,), str(error))
        if option.type == "rule-ids":
            cautions = [v for v in sorted(value) if v in CAUTION_KINDS]
            if cautions:
                fail(keys + (key,), not_a_rule(cautions[0]))
            unknown = [v for v in sorted(value) if v not in known_rules]
            if unknown:
                fail(keys + (key,), f"unknown rule id {', '.join(unknown)} in {key}")
            if key == "select" and not value:  # no rule would run, and anything pass
                fail(keys + (key,), "select names no rule id; `ampcheck rules` lists them")
        elif option.type == "paths":
            value = [os.path.normpath(os.path.join(base, v)) for v in value]
        elif option.type == "path":
            value = os.path.normpath(os.path.join(base, value))
        values[key] = Valued(value, origin)
    return values


def deprecation(note: str) -> None:
    """Tell the user once per run about an old spelling (standard error)."""
    if note not in _NOTED:
        _NOTED.add(note)
        print(f"ampcheck: note: {note}", file=sys.stderr)


_NOTED: set[str] = set()


def _rule_tables(table: dict, keys: tuple, where, fail: Callable[[tuple, str], NoReturn],
                 known_rules) -> dict:
    """[rules.ID] tables: severity and the rule's settings (by kebab-case key, the old
    snake_case spelling accepted with a note), stored by the name the rule reads."""
    if not isinstance(table, dict):
        fail(keys, "rules is a table of [rules.RULE-ID] tables")
    result: dict[str, dict[str, Valued]] = {}
    for rule_id, settings in table.items():
        if rule_id in CAUTION_KINDS:
            fail(keys + (rule_id,), not_a_rule(rule_id))
        if rule_id not in known_rules:
            fail(keys + (rule_id,), _unknown(rule_id, known_rules).replace("key", "rule id"))
        if not isinstance(settings, dict):
            fail(keys + (rule_id,), f"[rules.{rule_id}] must be a table")
        declared = rule_settings(known_rules[rule_id])
        by_old = {s.name: s for s in declared.values()}
        allowed = set(declared) | {"severity"}
        checked: dict[str, Valued] = {}
        for name, value in settings.items():
            path = keys + (rule_id, name)
            if name == "severity":
                try:
                    value = Severity.parse(str(value))
                except ValueError as error:
                    fail(path, str(error))
                checked[name] = Valued(value, where(*path))
                continue
            setting = declared.get(name)
            if setting is None and name in by_old and name != by_old[name].key:
                setting = by_old[name]
                deprecation(f"{where(*path)}: {rule_id} setting {name!r} is spelt"
                            f" {setting.key!r} now (the old spelling still works)")
            if setting is None:
                fail(path, _unknown(name, allowed).replace("key", f"setting of {rule_id}"))
            if setting.name in checked:  # both spellings: which one is meant?
                fail(path, f"{rule_id} setting {setting.key!r} is given twice (as"
                           f" {setting.key!r} and {setting.name!r}); keep one")
            try:
                value = setting.parse(value)
            except OptionError as error:
                fail(path, str(error))
            checked[setting.name] = Valued(value, where(*path))
        result[rule_id] = checked
    return result


@lru_cache(maxsize=256)
def find_config_file(folder: str) -> str | None:
    """The closest ampcheck.toml, or pyproject.toml with [tool.ampcheck], from ``folder``
    upwards, never above the repository root (the first folder holding .git); None
    when there is none."""
    folder = os.path.abspath(folder)
    while True:
        candidate = os.path.join(folder, CONFIG_FILE)
        if os.path.isfile(candidate):
            return candidate
        pyproject = os.path.join(folder, "pyproject.toml")
        if os.path.isfile(pyproject):
            try:
                with open(pyproject, "rb") as handle:
                    if b"[tool.ampcheck" in handle.read(MAX_CONFIG_BYTES):
                        return pyproject
            except OSError:
                pass
        if os.path.exists(os.path.join(folder, ".git")):
            return None
        parent = os.path.dirname(folder)
        if parent == folder:
            return None
        folder = parent
