"""Table text: values quoted to the digits their uncertainty allows, round-off uncertainties as 0."""

import math

import pandas as pd
import pytest

from knudsweep.families import Table
from knudsweep.tables import ROUND_OFF_NOTE, format_with_uncertainty, to_csv, to_markdown


@pytest.mark.parametrize(
    "value, unc, text",
    [
        (1.63149, 0.0121192, ("1.631", "0.012")),  # 2 significant digits of u, value to the same place
        (2.69698, 0.393623, ("2.70", "0.39")),
        (2.25974e-07, 1.6786e-09, ("2.260e-07", "1.7e-09")),  # seconds: scientific, same last place
        (2.6951e-07, 1.83406e-08, ("2.70e-07", "1.8e-08")),
        (0.5, 3.0, ("0.5", "3.0")),
        (1.0, 0.0996, ("1.00", "0.10")),  # 0.0996 rounds up to 0.10: one place fewer
        (2.0, 1.19476e-13, ("2", "0")),  # round-off of a noise-free fit
        (2.28506e-07, 2.67564e-20, ("2.28506e-07", "0")),
        (0.0, 0.0, ("0", "0")),
        (math.nan, 0.1, ("", "0.1")),  # failed point: empty value
        (1.5, math.nan, ("1.5", "")),
    ],
)
def test_format_with_uncertainty(value, unc, text):
    assert format_with_uncertainty(value, unc) == text


def test_value_text_agrees_with_value_within_half_a_last_digit():
    for value, unc in ((1.6497632, 9.96799e-07), (3.0e-5, 2.0e-7), (123.456, 0.0123), (2.28505e-07, 1.4e-13)):
        v_text, u_text = format_with_uncertainty(value, unc)
        assert abs(float(v_text) - value) <= 0.5 * 10 ** (math.floor(math.log10(float(u_text))) - 1) * 1.0001
        assert abs(float(u_text) - unc) <= 0.05 * unc  # two significant digits: at most 5 % off


def test_tables_pair_columns_and_note_round_off():
    frame = pd.DataFrame(
        {
            "solver": ["dsmc-N20000", "bgk-nv32"],
            "anisotropy time [tau_c]": [1.63149, 2.0000000001],
            "anisotropy time uncertainty [tau_c]": [0.0121192, 1.2e-13],
            "anisotropy time [s]": [2.25974e-07, 2.28506e-07],
            "anisotropy time uncertainty [s]": [1.6786e-09, 1.4e-20],
            "mean collision time [s]": [1.38508e-07, 1.38508e-07],
            "status": ["converged", "converged"],
        }
    )
    table = Table(frame, "Relaxation times", ["a note"])
    md = to_markdown(table)
    assert "| dsmc-N20000 | 1.631 | 0.012 | 2.260e-07 | 1.7e-09 | 1.38508e-07 | converged |" in md
    assert "| bgk-nv32 | 2 | 0 | 2.28506e-07 | 0 | 1.38508e-07 | converged |" in md
    assert f"- {ROUND_OFF_NOTE}" in md and "1e-13" not in md and "e-20" not in md
    lines = to_csv(table).splitlines()
    assert lines[1] == "dsmc-N20000,1.631,0.012,2.260e-07,1.7e-09,1.38508e-07,converged"
    assert lines[2] == "bgk-nv32,2,0,2.28506e-07,0,1.38508e-07,converged"


def test_table_without_round_off_has_no_extra_note():
    frame = pd.DataFrame({"x [1]": [1.0], "x uncertainty [1]": [0.1], "y [1]": [math.nan]})
    md = to_markdown(Table(frame, "t", []))
    assert ROUND_OFF_NOTE not in md and "| 1.00 | 0.10 |  |" in md
