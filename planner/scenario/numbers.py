"""How a number may be written in a scenario: one rule for every numeric field and every input form.

**The rule.** A number is written in plain decimal: an optional sign, digits
with an optional decimal point, and an optional exponent (``400``, ``-0.5``,
``.5``, ``+12``, ``1e3``, ``2.5E-4``).  It means exactly that decimal value,
whether YAML typed it as a number or it arrives as text (a quoted ``"400"``,
a CSV cell, a text cell in a workbook).  Spellings whose meaning differs
between YAML 1.1 (how PyYAML reads a file), YAML 1.2 and a reader's eye are
refused, with the decimal number to write instead:

- a leading zero (``0400``: YAML 1.1 reads octal 256; ``08`` and ``010.5`` too, for one rule),
- ``0x190`` (hexadecimal), ``0o17`` (octal), ``0b101`` (binary),
- ``4_00`` (underscores between digits),
- ``6:40`` (YAML 1.1 reads base 60: 400).

``inf``, ``nan`` and the like (``.inf``, ``"infinity"``) are refused as not
finite; ``true``/``yes`` as not a number.  Sizes beyond ``MAX_MAGNITUDE`` or
below ``MIN_MAGNITUDE`` (other than 0) are refused by the schema's shared
number types (:mod:`planner.scenario.schema`), which call :func:`read_number`.

The YAML loader keeps what was written: a scalar YAML types as an integer or
float but spelled another way becomes a :class:`Spelled` value (its text and
the value YAML 1.1 gives it), and a number split by a comma inside ``{ }``
becomes a :class:`CommaSplit`; a workbook formula with no saved value becomes
a :class:`Formula`.  These are :class:`Unusable`: the validator reports each
once, where it is, and nothing else reads them.
"""

from __future__ import annotations

import math
import re
import unicodedata
from typing import Any

#: The plain decimal spelling: what a number field accepts, as text or as YAML wrote it.
PLAIN = re.compile(r"[-+]?(?:(?:0|[1-9][0-9]*)(?:\.[0-9]*)?|\.[0-9]+)(?:[eE][-+]?[0-9]+)?")
_PLAIN_INT = re.compile(r"[-+]?(?:0|[1-9][0-9]*)")
_NOT_FINITE = {"inf", "infinity", "nan", ".inf", ".nan", "∞"}

_HEX = re.compile(r"([-+]?)0[xX]([0-9a-fA-F_]+)")
_OCT = re.compile(r"([-+]?)0[oO]([0-7_]+)")
_BIN = re.compile(r"([-+]?)0[bB]([01_]+)")
_SEXAGESIMAL = re.compile(r"[-+]?[0-9][0-9_]*(?::[0-5]?[0-9])+(?:\.[0-9_]*)?")
_DIGITS = re.compile(r"[-+]?[0-9][0-9_]*(?:\.[0-9_]*)?(?:[eE][-+]?[0-9]+)?|[-+]?\.[0-9][0-9_]*(?:[eE][-+]?[0-9]+)?")


def _g(x: float) -> str:
    """A number as it should be written: integers without a point, others in shortest form."""
    if isinstance(x, int) or (isinstance(x, float) and x.is_integer() and abs(x) < 1e16):
        return str(int(x))
    return repr(float(x))


def _strip_zeros(body: str) -> str:
    """'0400' → '400', '-010.5' → '-10.5', '00' → '0' (sign kept)."""
    sign = body[0] if body[:1] in "+-" else ""
    rest = body[len(sign):].lstrip("0")
    if rest == "" or rest[0] in ".eE":
        rest = "0" + rest
    return ("-" if sign == "-" else "") + rest


def spelling(text: str) -> tuple[str, str] | None:
    """For a number spelled in a refused form: (what is odd about it, the decimal to write instead).

    None if ``text`` is plain decimal or not a number at all.
    """
    t = text.strip()
    for pattern, base, name in ((_HEX, 16, "hexadecimal"), (_OCT, 8, "octal"), (_BIN, 2, "binary")):
        m = pattern.fullmatch(t)
        if m and m.group(2).strip("_"):
            v = int(m.group(2).replace("_", ""), base) * (-1 if m.group(1) == "-" else 1)
            return f"is written in {name} ({v} in decimal)", str(v)
    if _SEXAGESIMAL.fullmatch(t):
        sign = -1 if t.startswith("-") else 1
        parts = [float(p) for p in t.lstrip("+-").replace("_", "").split(":")]
        base60 = 0.0
        for p in parts:
            base60 = base60 * 60 + p
        hours = sum(p / 60 ** k for k, p in enumerate(parts))
        meant, small = {2: ("hours and minutes", "minutes"), 3: ("hours, minutes and seconds", "seconds")}.get(
            len(parts), ("a time in hours", "its last unit"))
        return ("is written in base 60, like a time", f"{_g(round(sign * hours, 4))} if it means {meant}, "
                f"or {_g(sign * base60)} if {small}")
    if any(c.isdecimal() and not c.isascii() for c in t):  # ١٢٣, ４００: digits of another script
        ascii_ = "".join(str(unicodedata.decimal(c)) if c.isdecimal() else c for c in t)
        if PLAIN.fullmatch(ascii_) or spelling(ascii_):
            plain = ascii_ if PLAIN.fullmatch(ascii_) else (spelling(ascii_) or ("", ascii_))[1]
            return "is written with digits other than 0-9", plain
        return None
    if not _DIGITS.fullmatch(t) or PLAIN.fullmatch(t):
        return None
    body = t.replace("_", "")
    plain = _strip_zeros(body)
    if re.match(r"[-+]?0[0-9]", body):
        return "has a leading zero", plain
    return "has '_' between its digits", plain


def yaml_octal(text: str) -> bool:
    """Whether YAML 1.1 reads ``text`` (written plain) as an octal number: a leading zero, digits 0-7."""
    return re.fullmatch(r"[-+]?0[0-7_]+", text.strip()) is not None


class Unusable:
    """A value read from a file that cannot be used as written; the validator reports it where it is."""

    text: str = ""
    line: int | None = None  # 1-based, where the reader knows it
    column: int | None = None

    def place(self) -> str:
        """'line 4, column 12' where known, else ''."""
        return f"line {self.line}, column {self.column}" if self.line is not None else ""

    def problem(self, as_text: bool) -> tuple[str, str]:
        """(message, fix) where a number (``as_text`` False) or text (True) belongs."""
        raise NotImplementedError

    def __repr__(self) -> str:
        return self.text

    __str__ = __repr__

    def __eq__(self, other: object) -> bool:
        return type(other) is type(self) and other.text == self.text and other.line == self.line

    def __hash__(self) -> int:
        return hash((type(self).__name__, self.text, self.line))


class Spelled(Unusable):
    """A plain YAML scalar typed as a number but not written in plain decimal (``0400``, ``6:40``, ``0x190``)."""

    def __init__(self, text: str, value: Any, line: int | None = None, column: int | None = None) -> None:
        self.text, self.value, self.line, self.column = text, value, line, column

    def problem(self, as_text: bool) -> tuple[str, str]:
        if as_text:
            reads = "a number" if self.value is None else f"the number {_g(self.value)}"
            return f"must be text, but YAML reads {self.text} as {reads}", f"quote it: '{self.text}'"
        if self.value is None:  # YAML 1.1 matched it as a number but cannot read it (0x_)
            return (f"must be a plain decimal number: {self.text or repr(self.text)} is not a number YAML can read",
                    "write the amount in digits, e.g. 1200 or 0.75")
        what, plain = spelling(self.text) or ("is not written in plain decimal", _g(self.value))
        if yaml_octal(self.text) and isinstance(self.value, int):
            what += f", which YAML reads as the octal number {_g(self.value)}"
        elif "in decimal)" not in what:
            what += f", which YAML reads as {_g(self.value)}"
        return f"must be a plain decimal number: {self.text} {what}", f"write {plain}"


class CommaSplit(Unusable):
    """A number split by its comma inside a YAML flow mapping: ``{capacity: 4,160}`` reads as {capacity: 4, 160: null}."""

    def __init__(self, text: str, line: int | None = None, column: int | None = None) -> None:
        self.text, self.line, self.column = text, line, column

    def problem(self, as_text: bool) -> tuple[str, str]:
        head, rest = self.text.split(",", 1)
        what = (f"{self.text} is split at its comma: inside {{ }} a comma separates entries, so YAML reads "
                f"{head} here and {rest.replace(',', ' and ')} as {'keys' if ',' in rest else 'a key'} of its own")
        if as_text:
            return what, f"quote it: '{self.text}'"
        thousands = re.fullmatch(r"[-+]?[0-9]{1,3}(?:,[0-9]{3})+(?:\.[0-9]*)?", self.text)
        if thousands:
            return what, f"write {self.text.replace(',', '')}, without the comma"
        if self.text.count(",") == 1 and "." not in self.text:
            return what, f"write {self.text.replace(',', '.')}, with a decimal point"
        return what, "write the number in plain decimal, with a point for decimals and no separators"


class Formula(Unusable):
    """A workbook cell holding a formula whose value was never saved (a file written by a program, not opened since)."""

    def __init__(self, formula: str) -> None:
        self.text, self.line, self.column = formula, None, None

    def problem(self, as_text: bool) -> tuple[str, str]:
        return (f"holds a formula ({self.text[:40]}) with no saved value",
                "open the workbook in a spreadsheet program and save it, or type the value")


def read_number(x: Any) -> tuple[float | int | None, str, str]:
    """``x`` read by the number rule: (value, '', '') or (None, message, fix).

    Numbers pass through (ints stay ints: the schema's types check their size);
    text is read when it is plain decimal.  Range checks are the caller's
    (:func:`size_problem`).  Unusable values get their own message.
    """
    if isinstance(x, bool):
        return None, "must be a number, not true/false", "write the amount in digits"
    if isinstance(x, (int, float)):
        return x, "", ""
    if isinstance(x, Unusable):
        message, fix = x.problem(as_text=False)
        return None, message, fix
    if isinstance(x, str):
        t = x.strip()
        if PLAIN.fullmatch(t):
            return (int(t) if _PLAIN_INT.fullmatch(t) else float(t)), "", ""
        if t.lower().lstrip("+-") in _NOT_FINITE:
            return None, f"must be a finite number (got {x!r})", "write an ordinary number"
        odd = spelling(t)
        if odd is not None:
            return None, f"must be a plain decimal number: '{t}' {odd[0]}", f"write {odd[1]}"
        from planner.scenario.units import amount_hint

        message, fix = amount_hint(t)
        return None, message, fix
    return None, "must be a number", "write digits only, e.g. 1200 or 0.75"


#: Largest size of any number in a scenario; beyond it, amounts lose their cents in float arithmetic.
MAX_MAGNITUDE = 1e15
#: Smallest size of a number other than 0; below it, solver tolerances swamp it.
MIN_MAGNITUDE = 1e-12


def size_problem(x: float) -> str:
    """'' if ``x`` is finite and within the sizes a scenario may hold, else why not."""
    if not math.isfinite(x):
        return "must be a finite number"
    if abs(x) > MAX_MAGNITUDE:
        return f"is too large (more than {MAX_MAGNITUDE:.0e})"
    if 0 < abs(x) < MIN_MAGNITUDE:
        return f"is too small (below {MIN_MAGNITUDE:.0e} but not 0)"
    return ""


#: Fixes for :func:`size_problem`'s messages, by their start.
SIZE_FIXES = {
    "must be a finite number": "write an ordinary number",
    "is too large": "use a larger unit, such as thousands or tonnes, so amounts stay within 1e15",
    "is too small": "write 0, or change units so the amount is at least 1e-12",
}


def number_or_problem(x: Any) -> tuple[float | None, str, str]:
    """The whole rule for a number outside the schema's types (demand forms, history files): value or (message, fix)."""
    value, message, fix = read_number(x)
    if value is None:
        return None, message, fix
    try:
        f = float(value)
    except OverflowError:
        f = math.inf if value > 0 else -math.inf
    if math.isfinite(f) or not isinstance(value, int):
        why = size_problem(f)
    else:
        why = f"is too large (more than {MAX_MAGNITUDE:.0e})"
    if why:
        return None, why, next(v for k, v in SIZE_FIXES.items() if why.startswith(k))
    return f, "", ""
