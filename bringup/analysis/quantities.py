"""Engineering-notation quantities: read "4.7u", "40 nC", "2.2 µF", "4k7", "25 °C"; print "4.7 µF".

``parse_quantity`` returns plain SI floats (farads, seconds, ohms, degrees Celsius for
temperatures written in °C). It reads the grammar itself, strictly, because a bench tool must
not guess: quantiphy (which ``format_quantity`` uses for printing) reads "47R" as 47 ronna,
"4k7" as 4 with unit "k7", "1,5" as 15 and "2 K" as 2000, all silently. The resistor codes
of the trade ("47R", "4R7", "4k7", "1M5", IEC 60062) are read as ohms.

"min" and "h" are read as seconds (a soak of "20 min" is 1200.0 s).

A bare "K" after a number is kilo when no unit is expected ("2K2", "10K" in electronics
usage) and kelvin when the caller expects K or K/W.
"""

from __future__ import annotations

import math
import re
from decimal import Decimal

from quantiphy import Quantity

from bringup.errors import InputError

__all__ = ["parse_quantity", "parse_quantity_unit", "format_quantity", "canonical_unit"]

# SI prefixes accepted on input. "K" is handled apart (kilo or kelvin, see module doc).
# Powers of ten, applied with Decimal so that "38 us" is exactly the float 38e-6.
_PREFIXES = {
    "y": -24,
    "z": -21,
    "a": -18,
    "f": -15,
    "p": -12,
    "n": -9,
    "u": -6,
    "\u00b5": -6,  # MICRO SIGN
    "\u03bc": -6,  # GREEK SMALL LETTER MU
    "m": -3,
    "k": 3,
    "M": 6,
    "G": 9,
    "T": 12,
}

# Spellings of each unit -> canonical name. The canonical name is what callers pass as ``unit``.
_UNIT_ALIASES = {
    "V": "V",
    "A": "A",
    "F": "F",
    "H": "H",
    "C": "C",  # coulomb (a temperature is degC / °C)
    "s": "s",
    "sec": "s",
    "Hz": "Hz",
    "W": "W",
    "J": "J",
    "ohm": "ohm",
    "ohms": "ohm",
    "Ohm": "ohm",
    "Ohms": "ohm",
    "\u03a9": "ohm",  # GREEK CAPITAL LETTER OMEGA
    "\u2126": "ohm",  # OHM SIGN
    "K": "K",
    "degC": "degC",
    "°C": "degC",
    "℃": "degC",
    "K/W": "K/W",
    "°C/W": "K/W",
    "degC/W": "K/W",
    "V/s": "V/s",
    "A/s": "A/s",
    "%": "%",
}
# Longer times for soaks and logs ("20 min"), read as seconds; no prefixes on them.
_MINUTES_HOURS = {"min": 60, "h": 3600}
# Units that take no SI prefix on input or output (temperatures, ratios, thermal resistance).
_NO_PREFIX = {"degC", "%", "K/W"}
# How each canonical unit is printed.
_DISPLAY = {"ohm": "Ω", "degC": "°C"}

_NUMBER = r"[+-]?(?:\d+(?:\.\d*)?|\.\d+)(?:[eE][+-]?\d+)?"
_QUANTITY_RE = re.compile(rf"^({_NUMBER})\s*(\S*)$")
# IEC 60062 resistor code: the letter stands for the decimal point and the multiplier.
_RCODE_RE = re.compile(r"^(\d*)([RrKkMG])(\d*)$")
_RCODE_EXP = {"R": 0, "r": 0, "K": 3, "k": 3, "M": 6, "G": 9}


# Subclass so that our print preferences never touch another user of quantiphy.
class _Printed(Quantity):
    pass


_Printed.set_prefs(
    map_sf=Quantity.map_sf_to_greek,
    strip_zeros=True,
    spacer=" ",
    output_sf="TGMkmunpf",
)


def canonical_unit(unit: str) -> str:
    """The canonical spelling of a unit ("Ω" -> "ohm", "°C" -> "degC"); ValueError if unknown."""
    try:
        return _UNIT_ALIASES[unit]
    except KeyError:
        raise ValueError(f"unknown unit {unit!r}") from None


def _fail(text: object, unit: str | None, where: str, why: str = "") -> InputError:
    head = f"{where}: " if where else ""
    tail = f" in {_DISPLAY.get(unit, unit)}" if unit else ""
    extra = f" ({why})" if why else ""
    return InputError(f"{head}cannot read {str(text)!r} as a quantity{tail}{extra}")


def _scaled(number: str, exponent: int) -> float:
    return float(Decimal(number).scaleb(exponent))


def _split_suffix(suffix: str, expected: str | None) -> tuple[int, str | None] | None:
    """Split "kohm" into (3, "ohm"); None when the suffix is not prefix+unit."""
    if suffix == "":
        return 0, None
    if suffix in _MINUTES_HOURS:
        return 0, "s"  # scaled by the caller
    if suffix in _UNIT_ALIASES:
        unit = _UNIT_ALIASES[suffix]
        # Bare "K": kelvin only when the caller expects a kelvin quantity.
        if unit == "K" and expected not in ("K", "K/W"):
            return 3, None
        return 0, unit
    if suffix in _PREFIXES:
        return _PREFIXES[suffix], None
    head, rest = suffix[0], suffix[1:]
    if head == "K" and rest in _UNIT_ALIASES and _UNIT_ALIASES[rest] != "K":
        head = "k"  # "10 Kohm": a capital K used as kilo
    if head in _PREFIXES and rest in _UNIT_ALIASES:
        unit = _UNIT_ALIASES[rest]
        if unit in _NO_PREFIX:
            return None
        return _PREFIXES[head], unit
    return None


def parse_quantity_unit(
    text: str | float | int, unit: str | None = None, *, where: str = ""
) -> tuple[float, str | None]:
    """Read a quantity and return ``(SI value, canonical unit or None)``.

    ``unit`` (canonical or any accepted spelling) is the unit the caller expects: a text in
    another unit is an error; a bare number is taken in ``unit``. ``where`` (a key, an option)
    is quoted in the error. Non-finite values (nan, inf) are errors: no design quantity is one.
    """
    expected = None
    if unit is not None:
        try:
            expected = canonical_unit(unit)
        except ValueError:
            raise ValueError(f"parse_quantity: unknown expected unit {unit!r}") from None
    if isinstance(text, bool):
        raise _fail(text, expected, where, "a boolean is not a quantity")
    if isinstance(text, int | float) or type(text).__module__ == "numpy":
        try:
            value = float(text)  # type: ignore[arg-type]
        except (TypeError, ValueError):
            raise _fail(text, expected, where) from None
        if not math.isfinite(value):
            raise _fail(text, expected, where, "not a finite number")
        return value, expected
    if not isinstance(text, str):
        raise _fail(text, expected, where, f"expected text or a number, got {type(text).__name__}")

    s = text.strip()
    if not s:
        raise _fail(text, expected, where, "empty")

    code = _RCODE_RE.match(s)
    if code:
        whole, letter, frac = code.groups()
        # "47R", "4R7", "R47" always; "4k7", "1M5" only with digits on both sides, since a
        # plain "100k" or "2M" is a number with a prefix (read below).
        if letter in "Rr" and (whole or frac) or (whole and frac):
            if expected not in (None, "ohm"):
                raise _fail(text, expected, where, "a resistor code is in ohms")
            return _scaled(f"{whole or 0}.{frac or 0}", _RCODE_EXP[letter]), "ohm"

    m = _QUANTITY_RE.match(s)
    if not m:
        raise _fail(text, expected, where)
    number, suffix = m.groups()
    split = _split_suffix(suffix, expected)
    if split is None:
        raise _fail(text, expected, where, f"unknown unit {suffix!r}")
    scale, found = split
    if expected is not None and found is not None and found != expected:
        raise _fail(text, expected, where, f"its unit is {_DISPLAY.get(found, found)}")
    value = _scaled(number, scale) * _MINUTES_HOURS.get(suffix, 1)
    if not math.isfinite(value):
        raise _fail(text, expected, where, "not a finite number")
    return value, found if found is not None else expected


def parse_quantity(text: str | float | int, unit: str | None = None, *, where: str = "") -> float:
    """Read "4.7u", "40 nC", "100k", "2.2 µF", "47R", "4k7", "8 mΩ", "25 °C" as an SI float.

    Temperatures in °C/degC are returned in degrees Celsius (25.0 for "25 °C"), K/W as is,
    "%" as the number of percent. Floats and ints pass through. Raises
    ``bringup.errors.InputError`` quoting the text and ``where``, e.g.
    ``design.bus_voltage: cannot read '24 Vx' as a quantity in V (unknown unit 'Vx')``.
    """
    return parse_quantity_unit(text, unit, where=where)[0]


def format_quantity(value: float | None, unit: str, digits: int = 4) -> str:
    """Print ``value`` (SI) with an SI prefix and ``digits`` significant digits: "4.7 µF".

    Trailing zeros are dropped. °C, %, K/W and dimensionless values get no prefix. ``None``
    prints as "n/a"; NaN and infinities as "nan", "inf", "-inf".
    """
    if value is None:
        return "n/a"
    value = float(value)
    try:
        canon = canonical_unit(unit) if unit else ""
    except ValueError:
        canon = unit  # print unknown units as given
    shown = _DISPLAY.get(canon, canon)
    if not math.isfinite(value):
        text = "nan" if math.isnan(value) else ("inf" if value > 0 else "-inf")
        return f"{text} {shown}".rstrip()
    # No prefix for temperatures and ratios, nor "ks" for long times (a soak runs 1800 s).
    if canon in _NO_PREFIX or canon in ("", "K") or (canon == "s" and abs(value) >= 1):
        number = f"{value:.{digits}g}" if abs(value) < 10**digits else f"{value:.0f}"
        if "e" not in number and "." in number:
            number = number.rstrip("0").rstrip(".")
        return f"{number} {shown}" if shown else number
    return _Printed(value, shown).render(prec=max(digits - 1, 0))
