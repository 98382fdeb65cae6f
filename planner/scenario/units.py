"""Units stated in a scenario, and the checks they allow.

A scenario states units in three places: each resource's ``unit`` (h, kg,
m² ...), each product's ``unit`` (pieces, kg ...) and, by mistake, inside an
amount: ``capacity: "4160 h"``, ``usage: {mill: "0.8 h/piece"}``,
``adds: {booth: "624 h"}``.  Amounts must be plain numbers, so such text is
refused; but the unit written in it is compared with the unit the scenario
states for that resource (and, after a '/', for that product), so the message
can say whether only the number needs writing out or whether the units
disagree (an option adding hours to a resource counted in kg).  Unit spellings
are compared after normalising common ones (hours, hrs, hr → h; kilograms →
kg; ...); units not in the table are compared as written, ignoring case.
"""

from __future__ import annotations

import re
from dataclasses import dataclass

#: Common spellings of a unit and the canonical symbol they stand for.
_ALIASES = {
    "h": ("h", "hr", "hrs", "hour", "hours", "std"),
    "min": ("min", "mins", "minute", "minutes"),
    "s": ("s", "sec", "secs", "second", "seconds"),
    "shift": ("shift", "shifts"),
    "day": ("d", "day", "days"),
    "kg": ("kg", "kgs", "kilogram", "kilograms", "kilo", "kilos"),
    "g": ("g", "gram", "grams"),
    "t": ("t", "tonne", "tonnes", "ton", "tons"),
    "lb": ("lb", "lbs", "pound", "pounds"),
    "l": ("l", "litre", "litres", "liter", "liters"),
    "ml": ("ml", "millilitre", "millilitres", "milliliter", "milliliters"),
    "m3": ("m3", "m³", "m^3", "cbm", "cubic metre", "cubic metres", "cubic meter", "cubic meters"),
    "m2": ("m2", "m²", "m^2", "sqm", "square metre", "square metres", "square meter", "square meters"),
    "m": ("m", "metre", "metres", "meter", "meters"),
    "pcs": ("pc", "pcs", "piece", "pieces", "unit", "units", "each", "ea", "item", "items"),
}
_CANON = {alias: canon for canon, aliases in _ALIASES.items() for alias in aliases}

_NUMBER = r"[-+]?\.?\d[\d,._ ']*(?:[eE][-+]?\d+)?"
_WITH_UNIT = re.compile(rf"^\s*(?P<num>{_NUMBER})\s*(?P<unit>[^\d\s].*?)\s*$")
_CURRENCY = "$€£¥₹"


def canonical(unit: str) -> str:
    """The canonical spelling of a unit ('hours' → 'h'); unknown units lower-cased as written."""
    u = " ".join(str(unit).strip().lower().split()).rstrip(".")
    return _CANON.get(u, u)


def same_unit(a: str, b: str) -> bool:
    """True if two unit texts name the same unit (after normalising spellings)."""
    return canonical(a) == canonical(b)


@dataclass(frozen=True)
class Amount:
    """A number written as text, split into its parts."""

    number: str  # the digits as written ("1,000")
    unit: str  # the text after it ("h/piece"), or ""
    value: float | None  # the number if it can be read without separators, else None


def split_amount(text: str) -> Amount | None:
    """Split text such as '12 h', '1,000', '€620' or '0.8 h/piece'; None if it holds no number."""
    t = str(text).strip()
    if t and t[0] in _CURRENCY:
        t = t[1:].strip()
    m = _WITH_UNIT.match(t)
    if re.fullmatch(_NUMBER, t) and re.search(r"\d", t):
        num, unit = t, ""
    elif m is not None and re.search(r"\d", m.group("num") or ""):
        num, unit = m.group("num").strip(), m.group("unit").strip()
    else:
        return None
    if "," in num and "." in num:
        return Amount(num, unit, None)
    if "," in num and not re.fullmatch(r"[-+]?\d{1,3}(,\d{3})+", num):
        num_plain = num.replace(",", ".")  # a decimal comma: 0,8
    else:
        num_plain = re.sub(r"[,_ ']", "", num)
    try:
        value = float(num_plain)
    except ValueError:
        value = None
    return Amount(num, unit, value)


def amount_hint(text: str, resource: str | None = None, resource_unit: str = "",
                product: str | None = None, product_unit: str = "") -> tuple[str, str]:
    """(message, fix) for text given where a plain number is needed, checking any unit in it.

    ``resource`` and ``resource_unit`` name the resource the amount is counted
    in (its capacity, a usage per unit, an option's addition), with
    ``product_unit`` the unit after a '/' in a usage rate.
    """
    raw = str(text)
    if raw.strip().endswith("%"):
        pct = split_amount(raw.strip()[:-1])
        example = (f"write {raw.strip()} as {pct.value / 100:g}" if pct and pct.value is not None
                   else "write 15% as 0.15")
        return "must be a plain number, not a percentage", example
    amt = split_amount(raw)
    if amt is None:
        return "must be a number", "write digits only, e.g. 1200 or 0.75"
    num = f"{amt.value:g}" if amt.value is not None else amt.number
    if raw.strip()[:1] in _CURRENCY:
        return "must be a plain number", f"write {num}: the currency is set once by 'currency:'"
    if amt.value is None:
        return "must be a plain number", "write digits with a decimal point only, e.g. 1000.5"
    if not amt.unit:
        if "," in amt.number and "." in num:
            return "must be a plain number", f"write {num} with a decimal point"
        return "must be a plain number", f"write {num} without thousands separators"
    unit, per = (amt.unit.split("/", 1) + [""])[:2] if "/" in amt.unit else (amt.unit, "")
    clashes = []
    if resource and resource_unit and not same_unit(unit, resource_unit):
        clashes.append(f"'{unit.strip()}' is not the unit of resources[{resource}] ('{resource_unit}')")
    if per.strip() and product and product_unit and not same_unit(per, product_unit):
        clashes.append(f"'{per.strip()}' is not the unit of products[{product}] ('{product_unit}')")
    if clashes:
        return (f"must be a plain number, and its unit disagrees: {'; '.join(clashes)}",
                f"convert the amount to {resource_unit}"
                + (f" per {product_unit}" if per.strip() and product_unit else "") + " and write the number alone")
    where = f"resources[{resource}].unit" if resource else "the 'unit:' field"
    if resource and not resource_unit:
        return ("must be a plain number",
                f"write {num} and state the unit once as unit: {unit.strip()} under resources[{resource}]")
    return "must be a plain number", f"write {num}: the unit belongs in {where}"
