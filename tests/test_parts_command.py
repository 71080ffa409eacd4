"""`ampcheck parts NAME`: one part in full, with its source; unknown names get hints."""

from __future__ import annotations

from checker.cli import EXIT_OK, EXIT_USAGE, main


def test_one_builtin_part_in_full_with_units_and_source(capsys):
    assert main(["parts", "cmos-rrio"]) == EXIT_OK
    out = capsys.readouterr().out
    # values are the project's own, from checker/parts/generic.parts
    assert "built-in library (invented, typical of the class)" in out
    assert "gbw_hz                       10 MHz" in out
    assert "current_noise_a_per_rthz     5 fA/√Hz" in out
    assert "supply_abs_max_v             6 V" in out
    assert "second_pole_hz               —" in out


def test_a_user_part_names_its_file(tmp_path, capsys):
    lib = tmp_path / "mine.parts"
    lib.write_text("(part heron-buffer (open-loop-gain 50k) (gbw 2MHz))\n", encoding="utf-8")
    assert main(["parts", "heron-buffer", "--parts", str(lib)]) == EXIT_OK
    out = capsys.readouterr().out
    assert f"user part file {lib}" in out and "2 MHz" in out


def test_an_unknown_name_lists_the_nearest_and_exits_2(capsys):
    assert main(["parts", "cmos-rail"]) == EXIT_USAGE == 2
    err = capsys.readouterr().err
    assert "no part named 'cmos-rail'" in err and "cmos-rrio" in err
