"""The preferred-number series (IEC 60063) against outside references.

References:
- IEC 60063 value tables (E6/E12/E24 exact lists, E48/E96/E192 spot values), as
  [IEC60063] (the standard's tables from memory, confirmed against the ``eseries``
  package [ESERIES]); keys are entries of tests/reference/SOURCES.md.
- The ``eseries`` package from PyPI (checked with eseries 1.2.1), an independent
  implementation of the same tables.  Its ``find_nearest`` measures LINEAR distance;
  ours is logarithmic, so nearest answers are compared only away from both midpoints.
"""

from __future__ import annotations

import math
import os

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from inventory.values import (
    SERIES,
    is_preferred,
    nearest_preferred,
    series_tolerance,
    series_values,
)

pytestmark = pytest.mark.reference

NAMES = ("E3", "E6", "E12", "E24", "E48", "E96", "E192")


def require_module(name: str):
    """Import a reference library; skip when absent, but fail under CI=true."""
    if os.environ.get("CI", "").strip().lower() == "true":
        import importlib

        return importlib.import_module(name)  # a missing package is a failure in CI
    return pytest.importorskip(name, reason=f"reference package '{name}' not installed")


@pytest.fixture(scope="module")
def eseries():
    return require_module("eseries")


def _key(eseries, name):
    return getattr(eseries, name)


# --- exact tables, IEC 60063 tables [IEC60063] --------------------------------------

IEC_60063 = {
    "E3": [10, 22, 47],
    "E6": [10, 15, 22, 33, 47, 68],
    "E12": [10, 12, 15, 18, 22, 27, 33, 39, 47, 56, 68, 82],
    "E24": [10, 11, 12, 13, 15, 16, 18, 20, 22, 24, 27, 30, 33, 36, 39, 43, 47, 51, 56, 62,
            68, 75, 82, 91],
}


@pytest.mark.parametrize("name", list(IEC_60063))
def test_e3_to_e24_equal_the_iec_60063_tables(name):
    # IEC 60063 [IEC60063]: compared exactly, not by a rounding formula.
    assert list(SERIES[name]) == IEC_60063[name]


def test_the_rounding_formula_would_be_wrong_for_e12():
    # IEC 60063 [IEC60063]: round(10**(i/12), 1) gives 26, 32, 38, 46, 83
    # where the standard has 27, 33, 39, 47, 82.  Our table must be the standard's.
    formula = [round(10 * 10 ** (i / 12)) for i in range(12)]
    assert formula != list(SERIES["E12"])
    for wrong, right in ((26, 27), (32, 33), (38, 39), (46, 47), (83, 82)):
        assert wrong in formula and wrong not in SERIES["E12"] and right in SERIES["E12"]


# IEC 60063 spot values [IEC60063].
E48_SPOT = [100, 105, 110, 115, 121, 127, 133, 140, 147, 154, 162, 169, 178, 187, 196, 205,
            215, 226, 237, 249, 261, 274, 287, 301, 316, 332, 348, 365, 383, 402, 422, 442,
            464, 487, 511, 536, 562, 590, 619, 649, 681, 715, 750, 787, 825, 866, 909, 953]
E96_EXTRA = [102, 107, 113, 118, 124, 130, 137, 143, 150, 158, 165, 174, 182, 191, 200, 210,
             221, 232, 243, 255, 267, 280, 294, 309, 324, 340, 357, 374, 392, 412, 432, 453,
             475, 499, 523, 549, 576, 604, 634, 665, 698, 732, 768, 806, 845, 887, 931, 976]
E192_MEMBERS = [101, 104, 109, 120, 150, 180, 200, 240, 470, 920, 988]
E192_NOT_MEMBERS = [220, 270, 300, 330, 390, 560, 680, 820]
E96_NOT_MEMBERS = [120, 180, 220, 270, 330, 390, 470, 560, 680, 820]


def test_e48_e96_e192_spot_values():
    # IEC 60063 [IEC60063]
    assert list(SERIES["E48"]) == E48_SPOT
    assert sorted(E48_SPOT + E96_EXTRA) == list(SERIES["E96"])
    for v in E192_MEMBERS:
        assert v in SERIES["E192"], v
        assert is_preferred(v / 100 * 1e3, "E192")
    for v in E192_NOT_MEMBERS:
        assert v not in SERIES["E192"], v
        assert not is_preferred(v * 10.0, "E192")
    for v in (475, 562, 681):
        assert v in SERIES["E96"]
    for v in E96_NOT_MEMBERS:
        assert v not in SERIES["E96"], v


def test_e192_index_185_is_920():
    # IEC 60063 irregular value [IEC60063]: 10**(185/192) = 9.1948 -> 920, not 919
    assert round(100 * 10 ** (185 / 192)) == 919
    assert SERIES["E192"][185] == 920


def test_nesting():
    # IEC 60063: E6 ⊂ E12 ⊂ E24 and E48 ⊂ E96 ⊂ E192, each every other value of the next.
    # E24 ⊄ E192 [IEC60063], so no nesting across the two families is assumed.
    for small, big in (("E3", "E6"), ("E6", "E12"), ("E12", "E24"),
                       ("E48", "E96"), ("E96", "E192")):
        assert SERIES[big][::2] == SERIES[small]
        assert set(SERIES[small]) <= set(SERIES[big])
    assert not set(x * 10 for x in SERIES["E24"]) <= set(SERIES["E192"])


# --- against the eseries package (PyPI) --------------------------------------------------

@pytest.mark.parametrize("name,scale", [("E3", 10), ("E6", 10), ("E12", 10), ("E24", 10),
                                        ("E48", 100), ("E96", 100), ("E192", 100)])
def test_tables_equal_eseries(eseries, name, scale):
    # eseries (PyPI): series() gives the mantissas as ints, 10..91 or 100..988
    assert list(eseries.series(_key(eseries, name))) == list(SERIES[name])


@pytest.mark.parametrize("name", ["E6", "E12", "E24"])
def test_every_e6_e12_e24_value_over_decades_equals_eseries(eseries, name):
    # eseries (PyPI): erange includes both ends
    lo, hi = 1.0, 1e7
    ours = series_values(name, lo, hi)
    theirs = list(eseries.erange(_key(eseries, name), lo, hi))
    assert len(ours) == len(theirs)
    for a, b in zip(ours, theirs, strict=True):
        assert math.isclose(a, b, rel_tol=1e-12), (a, b)


@pytest.mark.parametrize("name", ["E48", "E96", "E192"])
@pytest.mark.parametrize("lo,hi", [(1.0, 10.0), (1e3, 1.2e3), (4.5e5, 5.2e5), (0.009, 0.011)])
def test_e48_e96_e192_ranges_equal_eseries(eseries, name, lo, hi):
    ours = series_values(name, lo, hi)
    theirs = list(eseries.erange(_key(eseries, name), lo, hi))
    assert len(ours) == len(theirs)
    assert [round(x / y, 12) for x, y in zip(ours, theirs, strict=True)] == [1.0] * len(theirs)


@pytest.mark.parametrize("name", NAMES)
def test_tolerances_equal_eseries(eseries, name):
    # eseries (PyPI) tolerance(): E3 0.4, E6 0.2 … E192 0.005 [ESERIES]
    assert series_tolerance(name) == pytest.approx(eseries.tolerance(_key(eseries, name)))


def test_eseries_readme_examples(eseries):
    # eseries README examples [ESERIES], answered by our functions
    assert nearest_preferred(319, "E24") == 330.0 == eseries.find_nearest(eseries.E24, 319)
    assert min(v for v in series_values("E96", 184, 1000) if v >= 184) == 187.0
    assert eseries.find_greater_than_or_equal(eseries.E96, 184) == 187


def test_nearest_convention_differs_from_eseries_between_midpoints(eseries):
    # [ESERIES]: eseries' find_nearest is LINEAR (4290 -> 3900); ours is
    # geometric: √(3900·4700) = 4281.4 < 4290, so 4700.
    assert eseries.find_nearest(eseries.E12, 4290) == 3900
    assert nearest_preferred(4290, "E12") == 4700.0
    assert nearest_preferred(4281.0, "E12") == 3900.0
    assert nearest_preferred(4282.0, "E12") == 4700.0


@settings(max_examples=300, deadline=None)
@given(name=st.sampled_from(NAMES), exponent=st.floats(min_value=-2.0, max_value=7.0))
def test_nearest_agrees_with_eseries_away_from_midpoints(eseries, name, exponent):
    value = 10.0 ** exponent
    ours = nearest_preferred(value, name)
    theirs = eseries.find_nearest(_key(eseries, name), value)
    # the two neighbours around value, and both kinds of midpoint between them
    around = series_values(name, value / 12, value * 12)
    below = max(v for v in around if v <= value)
    above = min(v for v in around if v >= value)
    geo, lin = math.sqrt(below * above), (below + above) / 2
    lo_mid, hi_mid = min(geo, lin), max(geo, lin)
    if lo_mid * (1 - 1e-9) <= value <= hi_mid * (1 + 1e-9):
        # between the midpoints the conventions may legitimately differ
        assert ours == (above if value >= geo else below)
    else:
        assert math.isclose(ours, theirs, rel_tol=1e-9), (value, ours, theirs)


@settings(max_examples=200, deadline=None)
@given(name=st.sampled_from(NAMES), exponent=st.floats(min_value=-12.0, max_value=9.0))
def test_nearest_is_a_member_and_log_nearest(name, exponent):
    value = 10.0 ** exponent
    n = nearest_preferred(value, name)
    assert is_preferred(n, name)
    # no member of the series is closer in ratio (checked by brute force over neighbours)
    for v in series_values(name, value / 10, value * 10):
        assert abs(math.log(n / value)) <= abs(math.log(v / value)) + 1e-12


def test_series_values_are_exact_decimal_floats():
    vals = series_values("E12", 1e-12, 1e9)
    assert 4700.0 in vals and 4.7e-9 in vals and 2.2e-6 in vals and 8.2e8 in vals
    for v in vals:
        assert float(f"{v:.3g}") == v  # 2-3 significant figures, no 4699.999…
    assert vals == sorted(vals) and len(vals) == len(set(vals)) == 12 * 21 + 1
    assert series_values("E192", 9.19, 9.21) == [9.2]
