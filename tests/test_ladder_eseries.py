"""IEC 60063 preferred values: the tables against the standard's printed lists."""

import math

import pytest

from nullsteer.errors import ConfigError
from nullsteer.ladder.eseries import SERIES, get_series

# IEC 60063:2015, E12 and E24 lists (also /work/shared/REFERENCES.md "Resistors").
IEC_E12 = "10 12 15 18 22 27 33 39 47 56 68 82"
IEC_E24 = "10 11 12 13 15 16 18 20 22 24 27 30 33 36 39 43 47 51 56 62 68 75 82 91"
# IEC 60063:2015, E96 list (from memory of the standard's table; three figures).
IEC_E96 = ("100 102 105 107 110 113 115 118 121 124 127 130 133 137 140 143 147 150 154 158 "
           "162 165 169 174 178 182 187 191 196 200 205 210 215 221 226 232 237 243 249 255 "
           "261 267 274 280 287 294 301 309 316 324 332 340 348 357 365 374 383 392 402 412 "
           "422 432 442 453 464 475 487 499 511 523 536 549 562 576 590 604 619 634 649 665 "
           "681 698 715 732 750 768 787 806 825 845 866 887 909 931 953 976")
# IEC 60063:2015, E48 list (from memory of the standard's table).
IEC_E48 = ("100 105 110 115 121 127 133 140 147 154 162 169 178 187 196 205 215 226 237 249 "
           "261 274 287 301 316 332 348 365 383 402 422 442 464 487 511 536 562 590 619 649 "
           "681 715 750 787 825 866 909 953")


@pytest.mark.parametrize("name,printed,scale", [("E12", IEC_E12, 10), ("E24", IEC_E24, 10),
                                                ("E48", IEC_E48, 1), ("E96", IEC_E96, 1)])
def test_tables_match_the_standard(name, printed, scale):
    assert list(SERIES[name].mantissas) == [int(v) * scale for v in printed.split()]


def test_e24_differs_from_the_formula_only_at_the_historical_values():
    # IEC 60063: E24 keeps 2.7 3.0 3.3 3.6 3.9 4.3 4.7 8.2 where 10**(i/24) rounds otherwise.
    formula = [round(100 * 10 ** (i / 24), -1) for i in range(24)]
    diff = {m for m, f in zip(SERIES["E24"].mantissas, formula) if m != f}
    assert diff == {270, 300, 330, 360, 390, 430, 470, 820}


def test_e96_and_e48_follow_the_three_figure_formula_and_nest():
    # IEC 60063: E48/E96 values are 10**(i/N) to three figures; E48 is every other E96 value.
    assert list(SERIES["E96"].mantissas) == [round(100 * 10 ** (i / 96)) for i in range(96)]
    assert SERIES["E48"].mantissas == SERIES["E96"].mantissas[::2]
    assert SERIES["E12"].mantissas == SERIES["E24"].mantissas[::2]
    # the one E192 exception (920 instead of the formula's 919) is not an E96 value
    assert 919 not in SERIES["E96"].mantissas and 920 not in SERIES["E96"].mantissas


def test_tolerances_are_those_of_the_standard():
    # IEC 60063: E12 ±10 %, E24 ±5 %, E48 ±2 %, E96 ±1 %.
    assert {k: s.tolerance_pct for k, s in SERIES.items()} == {"E12": 10, "E24": 5, "E48": 2, "E96": 1}


def test_values_span_decades():
    v = SERIES["E12"].values_ohm(9.0, 1500.0)
    assert v[0] == 10.0 and v[-1] == 1500.0 and 820.0 in v and 1.2e3 in v
    assert all(b > a for a, b in zip(v, v[1:]))
    assert len(v) == 12 * 2 + 3          # 10..82, 100..820, 1000..1500
    assert math.isclose(SERIES["E96"].values_ohm(0.1, 0.2)[1], 0.102)


def test_unknown_series_names_the_key():
    with pytest.raises(ConfigError, match="--series: unknown series 'E7'"):
        get_series("E7", "--series")
