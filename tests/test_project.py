"""The project's own contract: README commands, CI script, packaging."""

import pathlib
import re

ROOT = pathlib.Path(__file__).resolve().parents[1]


def readme_commands() -> list[str]:
    text = (ROOT / "README.md").read_text()
    return re.findall(r"```sh\n(.+?)\n```", text)


def test_readme_has_exactly_two_setup_commands():
    commands = readme_commands()
    assert len(commands) == 2
    assert commands[0].endswith("ampcheck check samples/") or "check samples/" in commands[0]
    assert commands[1].endswith("pytest")


def test_ci_runs_the_readme_test_command_verbatim():
    ci = (ROOT / ".ci" / "run").read_text().splitlines()
    assert readme_commands()[1] in ci


def test_rules_package_ships_inside_checker():
    import checker.rules  # noqa: F401  (installed from the top-level rules/ folder)

    assert pathlib.Path(checker.rules.__file__).parent.name == "rules"
