"""Reading and writing component values; the IEC 60063 preferred-number series.

Pure Python (no third-party imports).  Every value is returned in SI units:
ohm, farad, volt, watt, hertz, ampere; a tolerance is a fraction (0.05 = 5 %).

Reading (``parse_value``)
-------------------------
Accepted forms, whitespace between the parts tolerated (``"4.7 kΩ"``, ``"100 nF"``):

* a number with an SI prefix and an optional unit: ``4.7k``, ``100n``, ``2.2uF``,
  ``250 MHz``, ``4.7 kΩ``.  Prefixes: ``p n u µ μ m k M G T`` and ``MEG``/``meg``
  for mega.  **Case matters**: ``m`` is milli, ``M`` is mega.  ``K`` is read as
  kilo for resistors and generic quantities (it is the IEC 60062 resistor letter),
  never for capacitors.
* the IEC 60062 letter-and-digit (RKM) code, the letter standing for the decimal
  point: ``4k7``, ``2R2``, ``R47``, ``1M0``, ``470R``, ``47K3``, ``4n7``, ``2u2``,
  ``p47``, ``1F0``.  Resistors also take ``L`` (milliohm, ``5L6`` = 5.6 mΩ).
* resistors refuse the prefixes ``p n u`` (almost always a capacitor value typed
  in a resistor row); a bare number on a resistor is ohms.
* **capacitors**: exactly three bare digits are always the EIA-198 style
  picofarad code: two significant digits and a power of ten, ``104`` = 100 nF,
  ``100`` = 10 pF, ``229`` = 2.2 pF (multiplier 8 means ×0.01, 9 means ×0.1,
  7 is unused and refused).  Any other bare number (``22``, ``1000``, ``0.1``)
  is refused as ambiguous: write ``22p``, ``1n``, ``100n``.  ``3R9`` on a
  capacitor is 3.9 pF (the small-value marking with R as the decimal point).
  A whole number followed by ``F`` (``22F``, ``104F``) is a marking with the
  tolerance letter F, not farads; farads are written with a decimal point or
  the RKM form (``1.0F``, ``1F0``, ``0.47F``).
* a number passed as ``float``/``int`` is taken as already SI (capacitors too).

Tolerance letters (``parse_value_tolerance``), IEC 60062:
B ±0.1 %, C ±0.25 %, D ±0.5 %, F ±1 %, G ±2 %, J ±5 %, K ±10 %, M ±20 %,
Z +80/−20 % (returned as 0.8, the wider side, so that a symmetric ± model stays
on the safe side).  Below 10 pF, B, C and D are absolute (±0.1, ±0.25, ±0.5 pF)
and are returned as the equivalent fraction of the value.  The text is first
read whole; only when that fails is a trailing letter taken as a tolerance.
So for a **resistor** ``22K`` is 22 kΩ, while for a **capacitor** (which never
takes k, K, M, G or T) ``22K`` is 22 pF ±10 %: a whole number of one or two
digits with a tolerance letter is picofarads, three digits are the EIA code
(``104J`` = 100 nF ±5 %), and ``4n7K`` is 4.7 nF ±10 %.

Writing (``format_value``)
--------------------------
One technician style for R and C: the IEC 60062 RKM code with 2–3 significant
figures.  Resistors: ``R47 1R0 2R2 47R 470R 4k7 4k75 47k 470k 1M0 4M7 10M``
(below 0.1 Ω milliohms as ``47m``, ``4m7``).  Capacitors: ``p47 4p7 10p 470p 1n0
4n7 100n 1u0 2u2 47u`` and, as printed on electrolytic cans, whole microfarads
from 1000 µF up: ``1000u 2200u 4700u`` (never ``1m0``).  From 1 F on: ``1F0``,
``22F0``.  Values far outside the ranges above fall back to ``1e-15F`` style.
``format_si`` writes any other quantity: ``12.3 mA``, ``1.59 kHz``.
"""

from __future__ import annotations

import decimal
import math
import numbers
import re
from decimal import Decimal

from inventory.errors import InputError

__all__ = [
    "SERIES",
    "TOLERANCE_LETTERS",
    "format_si",
    "format_value",
    "is_preferred",
    "nearest_preferred",
    "parse_frequency",
    "parse_power",
    "parse_tolerance",
    "parse_value",
    "parse_value_tolerance",
    "parse_voltage",
    "series_tolerance",
    "series_values",
]

# --------------------------------------------------------------------------------------
# Preferred numbers, IEC 60063 (tables as published; E3-E24 do not follow a formula)
# --------------------------------------------------------------------------------------

SERIES: dict[str, tuple[int, ...]] = {
    "E3": (10, 22, 47),
    "E6": (10, 15, 22, 33, 47, 68),
    "E12": (10, 12, 15, 18, 22, 27, 33, 39, 47, 56, 68, 82),
    "E24": (10, 11, 12, 13, 15, 16, 18, 20, 22, 24, 27, 30,
            33, 36, 39, 43, 47, 51, 56, 62, 68, 75, 82, 91),
    "E48": (100, 105, 110, 115, 121, 127, 133, 140, 147, 154, 162, 169, 178, 187, 196, 205,
            215, 226, 237, 249, 261, 274, 287, 301, 316, 332, 348, 365, 383, 402, 422, 442,
            464, 487, 511, 536, 562, 590, 619, 649, 681, 715, 750, 787, 825, 866, 909, 953),
    "E96": (100, 102, 105, 107, 110, 113, 115, 118, 121, 124, 127, 130, 133, 137, 140, 143,
            147, 150, 154, 158, 162, 165, 169, 174, 178, 182, 187, 191, 196, 200, 205, 210,
            215, 221, 226, 232, 237, 243, 249, 255, 261, 267, 274, 280, 287, 294, 301, 309,
            316, 324, 332, 340, 348, 357, 365, 374, 383, 392, 402, 412, 422, 432, 442, 453,
            464, 475, 487, 499, 511, 523, 536, 549, 562, 576, 590, 604, 619, 634, 649, 665,
            681, 698, 715, 732, 750, 768, 787, 806, 825, 845, 866, 887, 909, 931, 953, 976),
    "E192": (100, 101, 102, 104, 105, 106, 107, 109, 110, 111, 113, 114, 115, 117, 118, 120,
             121, 123, 124, 126, 127, 129, 130, 132, 133, 135, 137, 138, 140, 142, 143, 145,
             147, 149, 150, 152, 154, 156, 158, 160, 162, 164, 165, 167, 169, 172, 174, 176,
             178, 180, 182, 184, 187, 189, 191, 193, 196, 198, 200, 203, 205, 208, 210, 213,
             215, 218, 221, 223, 226, 229, 232, 234, 237, 240, 243, 246, 249, 252, 255, 258,
             261, 264, 267, 271, 274, 277, 280, 284, 287, 291, 294, 298, 301, 305, 309, 312,
             316, 320, 324, 328, 332, 336, 340, 344, 348, 352, 357, 361, 365, 370, 374, 379,
             383, 388, 392, 397, 402, 407, 412, 417, 422, 427, 432, 437, 442, 448, 453, 459,
             464, 470, 475, 481, 487, 493, 499, 505, 511, 517, 523, 530, 536, 542, 549, 556,
             562, 569, 576, 583, 590, 597, 604, 612, 619, 626, 634, 642, 649, 657, 665, 673,
             681, 690, 698, 706, 715, 723, 732, 741, 750, 759, 768, 777, 787, 796, 806, 816,
             825, 835, 845, 856, 866, 876, 887, 898, 909, 920, 931, 942, 953, 965, 976, 988),
}

_SERIES_TOLERANCE = {"E3": 0.40, "E6": 0.20, "E12": 0.10, "E24": 0.05,
                     "E48": 0.02, "E96": 0.01, "E192": 0.005}


def _series_key(name: str) -> str:
    key = str(name).strip().upper()
    if key not in SERIES:
        raise InputError(f"unknown preferred-number series '{name}' "
                         f"(choose from {', '.join(SERIES)})")
    return key


def series_tolerance(name: str) -> float:
    """Tolerance that goes with a series (E3 0.40 … E192 0.005), as a fraction."""
    return _SERIES_TOLERANCE[_series_key(name)]


def _mantissa_digits(key: str) -> int:
    return 2 if SERIES[key][0] < 100 else 3


def _decade(key: str, decade: int) -> list[float]:
    """Values of series ``key`` in [10**decade, 10**(decade+1)), exact floats."""
    shift = decade - _mantissa_digits(key) + 1
    return [float(f"{m}e{shift}") for m in SERIES[key]]


def series_values(name: str, lo: float, hi: float) -> list[float]:
    """All preferred values of a series in ``[lo, hi]``, ascending.

    Parameters
    ----------
    name : str
        ``"E3"`` … ``"E192"`` (case-insensitive).
    lo, hi : float
        Inclusive bounds in the quantity's unit (ohm, farad).  A relative slack of
        1e-9 absorbs float noise in the bounds.

    Returns
    -------
    list of float
        Exact decimal values as floats (``4700.0``, never ``4699.999…``).
    """
    key = _series_key(name)
    lo, hi = float(lo), float(hi)
    if not (math.isfinite(lo) and math.isfinite(hi)) or lo <= 0 or hi <= 0:
        raise ValueError(f"series bounds must be positive and finite, got {lo!r}, {hi!r}")
    if hi < lo:
        return []
    lo_s, hi_s = lo * (1 - 1e-9), hi * (1 + 1e-9)
    out: list[float] = []
    for d in range(math.floor(math.log10(lo)) - 1, math.floor(math.log10(hi)) + 2):
        out.extend(v for v in _decade(key, d) if lo_s <= v <= hi_s)
    return sorted(set(out))


def nearest_preferred(value: float, name: str) -> float:
    """The preferred value nearest to ``value`` in log space (ratio, not difference).

    The boundary between two neighbours a < b is their geometric mean √(a·b); an
    exact tie goes to the larger value.  (The ``eseries`` package measures linear
    distance instead, so the two answers differ between the two midpoints.)
    """
    key = _series_key(name)
    value = float(value)
    if not math.isfinite(value) or value <= 0:
        raise ValueError(f"nearest_preferred needs a positive finite value, got {value!r}")
    d = math.floor(math.log10(value))
    best, best_dist = 0.0, math.inf
    for dd in (d - 1, d, d + 1):
        for v in _decade(key, dd):
            dist = abs(math.log(v / value))
            if dist < best_dist or (dist == best_dist and v > best):
                best, best_dist = v, dist
    return best


def is_preferred(value: float, name: str, rel: float = 1e-6) -> bool:
    """True when ``value`` is a member of the series to within relative ``rel``."""
    value = float(value)
    if not math.isfinite(value) or value <= 0:
        return False
    return abs(nearest_preferred(value, name) - value) <= rel * value


# --------------------------------------------------------------------------------------
# Reading values
# --------------------------------------------------------------------------------------

#: IEC 60062 tolerance letters -> fraction (Z is +80/-20 %, taken as the wider 0.8).
TOLERANCE_LETTERS: dict[str, float] = {
    "B": 0.001, "C": 0.0025, "D": 0.005, "F": 0.01, "G": 0.02,
    "J": 0.05, "K": 0.10, "M": 0.20, "Z": 0.80,
}
#: IEC 60062, capacitors below 10 pF: absolute tolerances in farads.
_SMALL_CAP_ABSOLUTE = {"B": 0.1e-12, "C": 0.25e-12, "D": 0.5e-12}

_KINDS = {"resistor": "a resistance", "capacitor": "a capacitance", None: "a value"}

_NUM = r"(?:[0-9]+(?:\.[0-9]*)?|\.[0-9]+)(?:[eE][+-]?[0-9]+)?"
_UNIT = r"(?P<unit>Ω|[Oo][Hh][Mm][Ss]?|R|F|V|v|W|w|A|[Hh][Zz]|%)"
_SI_RE = re.compile(
    rf"(?P<sign>[+-]?)(?P<num>{_NUM})\s*(?P<prefix>[Mm][Ee][Gg]|[pnumkKMGT])?\s*{_UNIT}?")
_RKM_RE = re.compile(
    rf"(?P<sign>[+-]?)(?P<a>[0-9]*)(?P<letter>[Mm][Ee][Gg]|[RrLpnumkKMGTF])(?P<b>[0-9]*)"
    rf"\s*{_UNIT}?")

_PREFIX_EXP = {"p": -12, "n": -9, "u": -6, "m": -3, "k": 3, "K": 3, "M": 6, "MEG": 6,
               "G": 9, "T": 12}
_UNITS_FOR = {
    "resistor": {"Ω", "OHM", "OHMS", "R"},
    "capacitor": {"F"},
    None: {"Ω", "OHM", "OHMS", "R", "F", "V", "W", "A", "HZ", "%"},
}


def _normalise(text: str) -> str:
    return (text.strip().replace("\u00b5", "u").replace("\u03bc", "u")
            .replace("\u2126", "Ω"))


def _fail(text, kind, reason: str = "") -> InputError:
    what = _KINDS.get(kind, "a value") if isinstance(kind, str) or kind is None else "a value"
    msg = f"cannot read '{text}' as {what}"
    return InputError(msg + (f": {reason}" if reason else ""))


def _to_float(num: Decimal, exp: int) -> float:
    with decimal.localcontext() as ctx:
        ctx.prec = 60
        ctx.traps[decimal.Overflow] = False
        ctx.traps[decimal.Underflow] = False
        ctx.traps[decimal.InvalidOperation] = False
        ctx.Emax, ctx.Emin = 999999, -999999
        try:
            return float(num.scaleb(exp))
        except (ArithmeticError, ValueError):  # pragma: no cover - defensive
            return math.nan


def _letter_exp(letter: str, kind: str | None, rkm: bool, has_b: bool) -> int | str:
    """Power of ten for a multiplier letter, or the reason it is refused."""
    up = letter.upper()
    if kind == "resistor":
        if letter in "Rr":
            return 0
        if letter == "L":
            return -3 if rkm else "L (milliohm) is only used as a code letter, e.g. 5L6"
        if letter in "pnu":
            return f"'{letter}' is not used for resistances (a capacitor value?)"
        if letter == "F":
            return "F is not a resistance unit"
    elif kind == "capacitor":
        if letter == "F":
            return 0
        if letter == "R":
            if has_b:
                return -12          # 3R9: 3.9 pF, R as the decimal point
            return "R is the ohm unit; a capacitor is written 100p, 4n7, 3R9 (pF) …"
        if letter == "r" or letter == "L":
            return f"'{letter}' is not used for capacitances"
        if letter in "kKMGT" or up == "MEG":
            return (f"capacitors take no '{letter}' multiplier (k, M, G, T are for resistors; "
                    f"on a capacitor a trailing K or M is a tolerance letter, e.g. 22K = 22 pF ±10 %)")
    else:
        if letter in "Rr":
            return 0
        if letter in ("L", "F"):
            return f"'{letter}' is not a multiplier"
    if up == "MEG":
        return 6
    return _PREFIX_EXP[letter]


def _parse_text(text: str, kind: str | None) -> float:
    s = _normalise(text)
    if not s:
        raise _fail(text, kind, "empty")
    units = _UNITS_FOR[kind]
    m = _SI_RE.fullmatch(s)
    if m is not None:
        num, prefix, unit = m["num"], m["prefix"], m["unit"]
        exp = 0
        if unit is not None and unit.upper() not in units:
            raise _fail(text, kind, f"'{unit}' is not a unit of {_KINDS[kind][2:]}"
                        if kind else f"unknown unit '{unit}'")
        if unit == "%" and prefix:
            raise _fail(text, kind, "a percentage takes no prefix")
        if prefix:
            e = _letter_exp(prefix, kind, rkm=False, has_b=False)
            if isinstance(e, str):
                raise _fail(text, kind, e)
            exp += e
        is_int = num.isdigit()
        if kind == "capacitor" and not prefix:
            if unit is None:
                if len(num) == 3 and is_int and not m["sign"]:
                    return _eia_code(text, num)
                raise _fail(text, kind, "a bare number is ambiguous on a capacitor; "
                            "give a prefix (22p, 100n, 4u7) or a three-digit code (104)")
            if is_int:  # "22F", "104F": a marking with tolerance letter F, not farads
                raise _fail(text, kind, "a whole number followed by F is a marking with "
                            "tolerance letter F; write farads as 1.0F or 1F0, or give "
                            "a prefix (22p)")
        if unit == "%":
            exp -= 2
        value = _to_float(Decimal(num), exp)
        return -value if m["sign"] == "-" else value
    m = _RKM_RE.fullmatch(s)
    if m is not None and (m["a"] or m["b"]):
        letter, unit = m["letter"], m["unit"]
        if unit is not None and (unit.upper() not in units or unit == "%"):
            raise _fail(text, kind, f"'{unit}' does not belong after a code letter here")
        e = _letter_exp(letter, kind, rkm=True, has_b=bool(m["b"]))
        if isinstance(e, str):
            raise _fail(text, kind, e)
        value = _to_float(Decimal(f"{m['a'] or '0'}.{m['b'] or '0'}"), e)
        return -value if m["sign"] == "-" else value
    raise _fail(text, kind)


def _eia_code(text: str, digits: str) -> float:
    sig, mult = int(digits[:2]), int(digits[2])
    if mult == 7:
        raise _fail(text, "capacitor", "multiplier digit 7 is not used in the three-digit code")
    exp = {8: -2, 9: -1}.get(mult, mult)
    return _to_float(Decimal(sig), exp - 12)


def _check_kind(kind: str | None) -> None:
    if kind not in _KINDS:
        raise ValueError(f"kind must be 'resistor', 'capacitor' or None, not {kind!r}")


def _is_number(x) -> bool:
    return isinstance(x, numbers.Real) and not isinstance(x, bool)


def _check_range(value: float, text, kind: str | None) -> float:
    if not math.isfinite(value):
        raise _fail(text, kind, "not a finite number")
    if kind is not None and value <= 0:
        raise _fail(text, kind, "must be greater than zero")
    return value


def parse_value(text: str | float | int, kind: str | None = None) -> float:
    """Read a component value or quantity and return it in SI units.

    Parameters
    ----------
    text : str or float or int
        ``"4k7"``, ``"4.7 kΩ"``, ``"100n"``, ``"104"`` (capacitor code), ``"250 MHz"``;
        a number is taken as already SI.
    kind : {"resistor", "capacitor", None}
        Selects the rules (see the module docstring).  ``None`` is a generic
        quantity: any of the units Ω ohm R F V W A Hz % is accepted (``%``
        divides by 100) and zero or negative values are allowed.

    Returns
    -------
    float
        Ohms, farads, or the SI value of the generic quantity.

    Raises
    ------
    InputError
        The text cannot be read; the message names it, e.g.
        ``cannot read '4k7k' as a resistance``.  A trailing tolerance letter
        (``104J``) is refused here with a hint; :func:`parse_value_tolerance`
        reads it.
    """
    _check_kind(kind)
    try:
        return _parse_plain(text, kind)
    except InputError as first:
        if kind is None or not isinstance(text, str):
            raise
        try:
            value, _ = _read_with_letter(text, kind)
        except InputError:
            raise first from None
        shown = text.strip()
        raise _fail(shown, kind, f"the trailing '{_normalise(text)[-1]}' is a tolerance letter; "
                    f"give the value without it ({format_value(value, kind)}) and the "
                    f"tolerance on its own") from None


def _parse_plain(text, kind: str | None) -> float:
    if _is_number(text):
        return _check_range(float(text), text, kind)
    if not isinstance(text, str):
        raise _fail(text, kind, "not text or a number")
    return _check_range(_parse_text(text.strip(), kind), text.strip(), kind)


def _read_with_letter(text: str, kind: str) -> tuple[float, float]:
    """Read ``text`` as a value followed by one IEC 60062 tolerance letter."""
    shown = text.strip()
    s = _normalise(text)
    letter = s[-1:]
    body = s[:-1].rstrip()
    if letter not in TOLERANCE_LETTERS or not body:
        raise _fail(shown, kind)
    if kind == "capacitor" and body.isdigit() and len(body) <= 3:
        if len(body) == 3:
            value = _eia_code(shown, body)
        else:                       # "22K": a plain picofarad marking
            value = float(f"{body}e-12")
        value = _check_range(value, shown, kind)
    else:
        value = _parse_plain(body, kind)
    tol = TOLERANCE_LETTERS[letter]
    if kind == "capacitor" and value < 10e-12 and letter in _SMALL_CAP_ABSOLUTE:
        tol = _SMALL_CAP_ABSOLUTE[letter] / value
        if tol >= 1:
            err = _fail(shown, kind, f"tolerance {letter} (±{_SMALL_CAP_ABSOLUTE[letter] * 1e12:g}"
                        f" pF) is as large as the value")
            err.tolerance_too_large = True
            raise err
    return value, tol


def parse_value_tolerance(text: str | float | int,
                          kind: str | None = None) -> tuple[float, float | None]:
    """Like :func:`parse_value`, also reading a trailing IEC 60062 tolerance letter.

    The whole text is tried first; only if it cannot be read is a trailing letter
    B C D F G J K M Z taken as the tolerance (resistors and capacitors only).
    Resistor ``"22K"`` = (22e3, None), capacitor ``"22K"`` = (22e-12, 0.10),
    ``"104J"`` = (1e-7, 0.05), ``"4n7K"`` = (4.7e-9, 0.10),
    resistor ``"4K7J"`` = (4700.0, 0.05).

    Returns
    -------
    (value, tolerance)
        Value in SI units; tolerance as a fraction, or None when not given.
    """
    _check_kind(kind)
    try:
        return _parse_plain(text, kind), None
    except InputError as first:
        if kind is None or not isinstance(text, str):
            raise
        try:
            return _read_with_letter(text, kind)
        except InputError as second:
            if getattr(second, "tolerance_too_large", False):
                raise second from None
            raise first from None


def parse_tolerance(text: str | float) -> float:
    """Read a tolerance: ``"5%"``, ``"1 %"``, ``"±5%"``, ``"0.05"``, ``0.05`` -> fraction.

    A bare number is a fraction; a percentage needs ``%``.  A lone IEC 60062
    letter (``"J"``) is also accepted.  Refuses values ≤ 0 or ≥ 1 (100 %).
    """
    if _is_number(text):
        value = float(text)
        shown = text
    elif isinstance(text, str):
        s = _normalise(text)
        shown = text.strip()
        for lead in ("±", "+/-", "+-"):
            if s.startswith(lead):
                s = s[len(lead):].lstrip()
                break
        if s in TOLERANCE_LETTERS:
            return TOLERANCE_LETTERS[s]
        m = re.fullmatch(rf"({_NUM})\s*(%?)", s)
        if m is None:
            raise InputError(f"cannot read '{shown}' as a tolerance (write 5% or 0.05)")
        value = _to_float(Decimal(m[1]), -2 if m[2] else 0)
    else:
        raise InputError(f"cannot read '{text}' as a tolerance")
    if not math.isfinite(value) or value <= 0 or value >= 1:
        raise InputError(f"cannot read '{shown}' as a tolerance: it must lie between 0 and "
                         f"100 % (a bare number is a fraction: 0.05 = 5 %)")
    return value


def _parse_quantity(text, unit: str, what: str, positive: bool) -> float:
    if _is_number(text):
        value, shown = float(text), text
    elif isinstance(text, str):
        shown = text.strip()
        s = _normalise(text)
        m = _SI_RE.fullmatch(s)
        if m is None or (m["unit"] is not None and m["unit"].upper() != unit.upper()):
            raise InputError(f"cannot read '{shown}' as {what} (e.g. 4.7{_U[unit]})")
        exp = 0
        if m["prefix"]:
            p = m["prefix"]
            exp = 6 if p.upper() == "MEG" else _PREFIX_EXP[p]
        value = _to_float(Decimal(m["num"]), exp)
        if m["sign"] == "-":
            value = -value
    else:
        raise InputError(f"cannot read '{text}' as {what}")
    if not math.isfinite(value):
        raise InputError(f"cannot read '{shown}' as {what}: not a finite number")
    if positive and value <= 0:
        raise InputError(f"cannot read '{shown}' as {what}: must be greater than zero")
    return value


_U = {"W": "W", "V": "V", "Hz": "k"}


def parse_power(text: str | float, *, positive: bool = True) -> float:
    """Read a power in watts: ``"0.25W"``, ``"250mW"``, ``"0.25"``, ``"1/4W"``, ``"1/8 W"``."""
    if isinstance(text, str):
        m = re.fullmatch(r"\s*([0-9]+)\s*/\s*([0-9]+)\s*([Ww]?)\s*", text)
        if m is not None:
            num, den = int(m[1]), int(m[2])
            if den == 0 or num == 0:
                raise InputError(f"cannot read '{text.strip()}' as a power: "
                                 f"must be greater than zero")
            return num / den
    return _parse_quantity(text, "W", "a power", positive)


def parse_voltage(text: str | float, *, positive: bool = True) -> float:
    """Read a voltage in volts: ``"50V"``, ``"6.3"``, ``"16 V"``, ``"1kV"``.

    ``positive=False`` also admits zero and negative voltages.
    """
    return _parse_quantity(text, "V", "a voltage", positive)


def parse_frequency(text: str | float, *, positive: bool = True) -> float:
    """Read a frequency in hertz: ``"250M"``, ``"250 MHz"``, ``"1k"``, ``1000``."""
    return _parse_quantity(text, "Hz", "a frequency", positive)


# --------------------------------------------------------------------------------------
# Writing values
# --------------------------------------------------------------------------------------

def _sig(value: float, digits: int) -> tuple[str, int]:
    """Significant digits (as a string of length ``digits``) and decimal exponent."""
    mant, _, exp = f"{value:.{digits - 1}e}".partition("e")
    return mant.replace(".", ""), int(exp)


def _code(digits: str, exp: int, letter_exp: int, letter: str, *, min_sig: int = 2,
          frac_after_letter: bool = False) -> str:
    """Place the RKM letter as the decimal point of digits×10**(exp-len+1)."""
    n_int = exp - letter_exp + 1
    if n_int <= 0:
        frac = ("0" * -n_int + digits).rstrip("0")
        sig = len(frac) - (-n_int)
        if sig < min_sig:
            frac += "0" * (min_sig - sig)
        return letter + frac
    if n_int >= len(digits):
        whole, frac = digits + "0" * (n_int - len(digits)), ""
    else:
        whole, frac = digits[:n_int], digits[n_int:].rstrip("0")
    if len(whole) + len(frac) < min_sig or (frac_after_letter and not frac):
        frac = frac + "0"
    return whole + letter + frac


def format_value(value: float, kind: str) -> str:
    """Write a resistance or capacitance as a technician does (IEC 60062 RKM, 2–3 figures).

    Parameters
    ----------
    value : float
        Ohms or farads.
    kind : {"resistor", "capacitor"}

    Returns
    -------
    str
        ``4k7``, ``470R``, ``1M0``, ``R47``, ``4k75``; ``4p7``, ``100n``, ``2u2``,
        ``1000u``.  NaN gives ``—``; zero ``0R``/``0p``; a negative value gets a
        leading ``-``.
    """
    if kind not in ("resistor", "capacitor"):
        raise ValueError(f"kind must be 'resistor' or 'capacitor', not {kind!r}")
    value = float(value)
    if math.isnan(value):
        return "—"
    if value < 0:
        return "-" + format_value(-value, kind)
    if value == 0:
        return "0R" if kind == "resistor" else "0p"
    if math.isinf(value):
        return "∞"
    digits, exp = _sig(value, 3)
    if kind == "resistor":
        if exp < -3 or exp >= 15:
            return f"{float(f'{value:.2e}'):.3g}"
        if exp < -1:
            return _code(digits, exp, -3, "m")
        if exp < 3:
            return _code(digits, exp, 0, "R")
        letter_exp = 3 * (exp // 3)
        letter = {3: "k", 6: "M", 9: "G", 12: "T"}[letter_exp]
        return _code(digits, exp, letter_exp, letter)
    # capacitor
    if exp < -13:
        return f"{float(f'{value:.2e}'):.3g}F"
    if exp < -9:
        return _code(digits, exp, -12, "p")
    if exp < -6:
        return _code(digits, exp, -9, "n")
    if exp < 0:
        return _code(digits, exp, -6, "u")   # 1000 µF and up stay in µF: "2200u"
    return _code(digits, exp, 0, "F", frac_after_letter=True)


_SI_PREFIXES = {-12: "p", -9: "n", -6: "µ", -3: "m", 0: "", 3: "k", 6: "M",
                9: "G", 12: "T"}


def format_si(value: float | None, unit: str, digits: int = 3) -> str:
    """Write a quantity with an SI prefix: ``12.3 mA``, ``1.59 kHz``, ``4.7 V``, ``0 V``.

    Parameters
    ----------
    value : float
        In the SI unit ``unit``; negative values keep their sign.  NaN or None
        gives ``—``; infinities ``∞ V`` / ``-∞ V``.
    unit : str
        Written after the prefix (``"V"``, ``"Hz"``, ``"Ω"``; may be empty).
    digits : int
        Significant figures (trailing zeros are dropped).
    """
    if value is None:
        return "—"
    value = float(value)
    if math.isnan(value):
        return "—"
    sign = "-" if value < 0 else ""
    if math.isinf(value):
        return f"{sign}∞ {unit}".rstrip()
    if value == 0:
        return f"0 {unit}".rstrip()
    digits = max(1, int(digits))
    mant, exp = _sig(abs(value), digits)
    p = min(max(3 * (exp // 3), -12), 12)
    with decimal.localcontext() as ctx:
        ctx.prec = 60
        num = Decimal(f"{mant[0]}.{mant[1:]}e{exp}").scaleb(-p)
        s = format(num, "f")
    if "." in s:
        s = s.rstrip("0").rstrip(".")
    return f"{sign}{s} {_SI_PREFIXES[p]}{unit}".rstrip()
