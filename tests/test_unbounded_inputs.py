"""Unbounded inputs give short, clear errors (reliability issue, item 9): a huge value is never
echoed whole, and long unit text is refused before the unit parser sees it."""

import pytest

from explorer.units import UnitError, parse


def test_long_unit_text_is_refused_with_a_short_message():
    with pytest.raises(UnitError) as err:
        parse("1 " + "m" * 2_000_000, "m")
    message = str(err.value)
    assert len(message) < 400 and "at most 60 characters" in message
    assert "(2000002 characters)" in message


def test_ordinary_units_still_read():
    # 1 W/(m K) is 1 W m-1 K-1 (SI, BIPM brochure 9th ed. 2019, Table 4: derived units)
    assert parse("3 W/(m*K)", "W/(m*K)") == pytest.approx(3.0)
    assert parse("85 um", "m") == pytest.approx(85e-6)


def test_scenario_with_a_huge_value_prints_a_short_error(tmp_path, capsys):
    from explorer.cli import main

    path = tmp_path / "huge.toml"
    path.write_text('[scenario]\nname = "x"\ncell = "van_nmc_66ah"\n\n[[duty]]\nstep = "'
                    + "d" * 3_000_000 + '"\n', encoding="utf-8")
    code = main(["run", str(path), "--out", str(tmp_path / "out")])
    err = capsys.readouterr().err
    assert code == 2
    assert 0 < len(err) <= 2_100 and "Traceback" not in err
