"""Scenario dict ⇄ named tables (the shape shared by workbooks and CSV folders).

Tables (one sheet, or one CSV file, each; row 1 is the heading)::

    scenario        key, value               name, currency, period, plant_fixed_cost, description
    products        name, price_intercept, price_slope, unit_cost, fixed_cost, max_volume,
                    min_volume, min_run, must_run, unit, description
    usage           long: product, resource, amount (per unit made)
                    or wide: product, <one column per resource>   (blank = not used)
    resources       name, capacity, unit, kind, description
    options         name, cost, cost_per_unit, description
    option_amounts  option, resource, adds, adds_up_to
    demand          product, history, history_product, regress, reference_price, reference_volume,
                    elasticity, price_1, volume_1, price_2, volume_2   (see planner.demand)
    demand_fit      product, intercept_se, slope_se, covariance, n, r2, price_min, price_max, source
    uncertainty     product, resource, field, distribution, sd, mean, low, mode, high
    correlations    product_1, product_2, rho
    variants        name, description
    variant_changes variant, product, resource, option, plant, field, set, add, scale   (one row per change,
                    in order)

Any other column becomes a key of its entry, and any other table a list
section of its own, so nothing is dropped (the validator then names what it
does not know).  A heading ending in ``:json`` holds JSON text (nested values).
Only ``products`` is required; the scenario's name defaults to the file's stem.
Every cell is remembered, so a problem found later is reported as
"sheet products, row 4, column unit_cost".
"""

from __future__ import annotations

import json
import re
from collections.abc import Callable
from dataclasses import dataclass, field
from pathlib import Path
from typing import Any

from planner.errors import Problem
from planner.scenario.numbers import PLAIN, Unusable

SCALARS = ["name", "currency", "period", "plant_fixed_cost", "description"]
COLUMNS = {
    "products": ["name", "price_intercept", "price_slope", "unit_cost", "fixed_cost", "max_volume", "min_volume",
                 "min_run", "must_run", "unit", "description"],
    "resources": ["name", "capacity", "unit", "kind", "description"],
    "options": ["name", "cost", "cost_per_unit", "description"],
    "option_amounts": ["option", "resource", "adds", "adds_up_to"],
    "usage": ["product", "resource", "amount"],
    "demand": ["product", "history", "history_product", "regress", "reference_price", "reference_volume",
               "elasticity", "price_1", "volume_1", "price_2", "volume_2"],
    "demand_fit": ["product", "intercept_se", "slope_se", "covariance", "n", "r2", "price_min", "price_max",
                   "source"],
    "uncertainty": ["product", "resource", "field", "distribution", "sd", "mean", "low", "mode", "high"],
    "correlations": ["product_1", "product_2", "rho"],
    "variants": ["name", "description"],
    "variant_changes": ["variant", "product", "resource", "option", "plant", "field", "set", "add", "scale"],
}
ORDER = ["scenario", "products", "usage", "resources", "options", "option_amounts", "demand", "demand_fit",
         "uncertainty", "correlations", "variants", "variant_changes"]
TEXT = {"key", "name", "product", "resource", "option", "unit", "description", "kind", "currency", "period",
        "field", "distribution", "history", "history_product", "regress", "source", "product_1", "product_2",
        "variant"}
POINT_COLS = ["price_1", "volume_1", "price_2", "volume_2"]
_INT = re.compile(r"[-+]?(?:0|[1-9][0-9]*)")


@dataclass
class Table:
    """One table as read: heading and rows of cells (row numbers as the user sees them)."""

    name: str
    header: list[Any]
    rows: list[tuple[int, list[Any]]]


@dataclass
class ReadResult:
    """What a spreadsheet/CSV reader hands to the validator."""

    raw: dict[str, Any]
    locate: Callable[[str], str | None]
    problems: list[Problem] = field(default_factory=list)
    base_dir: Path | None = None


# ---------------------------------------------------------------- cells

def coerce(col: str, value: Any) -> Any:
    """A cell as the validator should see it: text columns as text, numbers parsed from text; '' is None.

    Text is read as a number only when it is written in plain decimal (the
    number rule of :mod:`planner.scenario.numbers`); other text (``0400``,
    ``1_000``, ``4,160``) stays text, for the validator to explain.
    """
    if isinstance(value, str):
        value = value.strip()
        if value == "":
            return None
    if value is None:
        return None
    if col in TEXT:
        if isinstance(value, float) and value.is_integer():
            return str(int(value))
        return str(value) if isinstance(value, (int, float)) and not isinstance(value, bool) else value
    if isinstance(value, str):
        if _INT.fullmatch(value):
            return int(value)
        if PLAIN.fullmatch(value):
            return float(value)
        if value.lower() in ("true", "false"):
            return value.lower() == "true"
    return value


def cell_text(value: Any) -> str:
    """A value as CSV text that :func:`coerce` reads back exactly."""
    if value is None:
        return ""
    if isinstance(value, bool):
        return "true" if value else "false"
    if isinstance(value, float):
        return repr(value)
    return str(value)


# ---------------------------------------------------------------- dict -> tables

def _columns(entries: list[dict], known: list[str], skip: set[str] = frozenset()) -> list[str]:
    if not entries:  # an empty section keeps its heading, so it reads back as an empty list
        return [c for c in known if c not in skip]
    seen = [c for c in known if any(c in e for e in entries)]
    for e in entries:
        seen += [k for k in e if k not in seen and k not in skip and k not in known]
    return seen


def _needs_json(col: str, value: Any) -> bool:
    """Whether a cell cannot carry ``value`` exactly (nested, or text that :func:`coerce` would read otherwise)."""
    if isinstance(value, (dict, list, tuple)):
        return True
    return isinstance(value, str) and coerce(col, value) != value


def _as_cells(header: list[str], rows: list[list[Any]]) -> tuple[list[str], list[list[Any]]]:
    """Columns holding a value a cell cannot carry exactly become ``:json`` columns."""
    nested = {j for j, c in enumerate(header) if any(j < len(r) and _needs_json(c, r[j]) for r in rows)}
    if not nested:
        return header, rows
    return ([f"{c}:json" if j in nested else c for j, c in enumerate(header)],
            [[json.dumps(v) if j in nested and v is not None else v for j, v in enumerate(r)] for r in rows])


def _rows(entries: list[dict], cols: list[str]) -> tuple[list[str], list[list[Any]]]:
    nested = {c for c in cols if any(c in e and _needs_json(c, e[c]) for e in entries)}
    header = [f"{c}:json" if c in nested else c for c in cols]
    rows = [[json.dumps(e[c]) if c in nested and c in e else e.get(c) for c in cols] for e in entries]
    return header, rows


def to_tables(raw: dict[str, Any], wide_usage: bool = False) -> dict[str, tuple[list[str], list[list[Any]]]]:
    """The scenario dict as tables {name: (heading, rows)}; the inverse of :func:`from_tables`."""
    out: dict[str, tuple[list[str], list[list[Any]]]] = {}
    sections = {k: v for k, v in raw.items() if isinstance(v, list) and all(isinstance(x, dict) for x in v)
                and k not in SCALARS}
    scal = [[f"{k}:json" if _needs_json(k, v) else k, json.dumps(v) if _needs_json(k, v) else v]
            for k, v in raw.items() if k not in sections]
    out["scenario"] = (["key", "value"], scal)
    products = sections.pop("products", [])
    cols = _columns(products, COLUMNS["products"], {"usage", "demand", "demand_fit"})
    out["products"] = _rows(products, cols)
    if any("usage" in p for p in products):
        res: list[str] = []
        for p in products:
            res += [r for r in (p.get("usage") or {}) if r not in res]
        if wide_usage and not any(_needs_json("resource", r) or not isinstance(r, str) for r in res):
            out["usage"] = (["product"] + res, [[p.get("name")] + [(p.get("usage") or {}).get(r) for r in res]
                                                for p in products if p.get("usage")])
        else:
            out["usage"] = _as_cells(COLUMNS["usage"], [[p.get("name"), r, a] for p in products
                                                         for r, a in (p.get("usage") or {}).items()])
    dem = []
    for p in products:
        if isinstance(p.get("demand"), dict):
            d = {"product": p.get("name")}
            for k, v in p["demand"].items():
                if k == "points" and isinstance(v, list) and len(v) == 2 and all(isinstance(x, list) and len(x) == 2 for x in v):
                    d.update(zip(POINT_COLS, [v[0][0], v[0][1], v[1][0], v[1][1]]))
                else:
                    d["history_product" if k == "product" else k] = v
            dem.append(d)
    if dem:
        out["demand"] = _rows(dem, _columns(dem, COLUMNS["demand"]))
    fits = [{"product": p.get("name"), **p["demand_fit"]} for p in products if isinstance(p.get("demand_fit"), dict)]
    if fits:
        out["demand_fit"] = _rows(fits, _columns(fits, COLUMNS["demand_fit"]))
    if "resources" in sections:
        res_ = sections.pop("resources")
        out["resources"] = _rows(res_, _columns(res_, COLUMNS["resources"]))
    if "options" in sections:
        opts = sections.pop("options")
        out["options"] = _rows(opts, _columns(opts, COLUMNS["options"], {"adds", "adds_up_to"}))
        amounts = [[o.get("name"), r, a if key == "adds" else None, a if key == "adds_up_to" else None]
                   for o in opts for key in ("adds", "adds_up_to") for r, a in (o.get(key) or {}).items()]
        out["option_amounts"] = _as_cells(COLUMNS["option_amounts"], amounts)
    if "correlations" in sections:
        cor = [{"product_1": (c.get("products") or [None, None])[0], "product_2": (c.get("products") or [None, None])[1],
                **{k: v for k, v in c.items() if k != "products"}} for c in sections.pop("correlations")]
        out["correlations"] = _rows(cor, _columns(cor, COLUMNS["correlations"]))
    if "variants" in sections:
        out.update(_variant_tables(sections.pop("variants")))
    for name, entries in sections.items():  # uncertainty and any list section the schema may gain
        out[name] = _rows(entries, _columns(entries, COLUMNS.get(name, [])))
    return out


def _variant_tables(variants: list[dict]) -> dict[str, tuple[list[str], list[list[Any]]]]:
    """Variants as two tables (variants; their changes one row each), or one with ``changes:json`` where rows
    could not say exactly which variant a change is of (no changes, names that repeat)."""
    names = [v.get("name").strip() if isinstance(v.get("name"), str) else None for v in variants]
    if not (all(isinstance(v.get("changes"), list) and v["changes"] and all(isinstance(c, dict) and "variant" not in c
                                                                           for c in v["changes"]) for v in variants)
            and None not in names and len(set(names)) == len(names)):
        return {"variants": _rows(variants, _columns(variants, COLUMNS["variants"]))}
    rows = [{"variant": v["name"], **c} for v in variants for c in v["changes"]]
    return {"variants": _rows(variants, _columns(variants, COLUMNS["variants"], {"changes"})),
            "variant_changes": _rows(rows, _columns(rows, COLUMNS["variant_changes"]))}


# ---------------------------------------------------------------- tables -> dict

class _Reader:
    def __init__(self, place: Callable[[str], str]) -> None:
        self.place = place
        self.where: dict[str, str] = {}
        self.problems: list[Problem] = []
        self.names: dict[str, str] = {}  # table key -> its name in the file

    def at(self, table: str, row: int | None = None, col: str | None = None) -> str:
        s = self.place(self.names.get(table, table))
        if row is not None:
            s += f", row {row}"
        if col is not None:
            s += f", column {col}"
        return s

    def records(self, t: Table, required: list[str]) -> list[tuple[int, dict[str, Any]]]:
        """Non-blank rows as {column: value}; problems for headings, required columns, gaps."""
        header = [str(h).strip() if h is not None else "" for h in t.header]
        while header and header[-1] == "":
            header.pop()
        for i, h in enumerate(header):
            if h and header.index(h) < i:
                self.problems.append(Problem(self.at(t.name, 1, h), "heading appears twice", "keep one of the columns"))
        for c in required:
            if c not in [h.removesuffix(":json") for h in header]:
                from planner.scenario.names import did_you_mean

                hint = did_you_mean(c, header) or f"row 1 must name the columns: {', '.join(required)}"
                self.problems.append(Problem(self.at(t.name, 1), f"has no column '{c}'", hint))
        out, blank = [], None
        for r, cells in t.rows:
            vals = [c for c in cells if c is not None and not (isinstance(c, str) and not c.strip())]
            if not vals:
                blank = blank or r
                continue
            if blank is not None:
                self.problems.append(Problem(self.at(t.name, blank), "is empty, but rows follow it",
                                             "delete the empty row: a table ends at its first empty row"))
                blank = None
            rec: dict[str, Any] = {}
            for i, c in enumerate(cells):
                if c is None or (isinstance(c, str) and not c.strip()):
                    continue
                if i >= len(header) or not header[i]:
                    self.problems.append(Problem(self.at(t.name, r, _letter(i)), f"has a value ({c!r}) under no heading",
                                                 "give the column a heading or clear the cell"))
                    continue
                h = header[i]
                if h.endswith(":json"):
                    key = h.removesuffix(":json")
                    try:
                        rec[key] = json.loads(c) if isinstance(c, str) else c
                    except json.JSONDecodeError as e:
                        self.problems.append(Problem(self.at(t.name, r, h), f"is not valid JSON ({e.msg})"))
                else:
                    rec[h] = coerce(h, c)
            out.append((r, rec))
        return out

    def entries(self, t: Table, section: str, key: str, required: list[str]) -> list[dict[str, Any]]:
        """Rows of a list section, each cell remembered under section[label].column."""
        self.where[section] = self.at(t.name)
        items = []
        for i, (r, rec) in enumerate(self.records(t, required)):
            name = rec.get(key)
            labels = [f"{section}[{i + 1}]"]
            if isinstance(name, str) and name.strip():
                labels.insert(0, f"{section}[{name.strip()}]")
            for label in labels:
                self.where.setdefault(label, self.at(t.name, r))
                for c in rec:
                    self.where.setdefault(f"{label}.{c}", self.at(t.name, r, c))
            items.append(rec)
        return items

    def locate(self, where: str) -> str | None:
        w = where
        while w:
            if w in self.where:
                return self.where[w]
            cut = max(w.rfind("."), w.rfind("["))
            w = w[:cut] if cut > 0 else ""
        return None


def _letter(i: int) -> str:
    s = ""
    i += 1
    while i:
        i, rem = divmod(i - 1, 26)
        s = chr(65 + rem) + s
    return s


def same_tables(names: list[str]) -> list[list[str]]:
    """Groups of table names that name one table (equal ignoring case and surrounding spaces)."""
    groups: dict[str, list[str]] = {}
    for n in names:
        groups.setdefault(n.strip().casefold(), []).append(n)
    return [g for g in groups.values() if len(g) > 1]


def from_tables(tables: dict[str, Table], place: Callable[[str], str], default_name: str,
                base_dir: Path | None = None) -> ReadResult:
    """Build the scenario dict from tables, remembering where every value came from."""
    from planner.scenario.names import did_you_mean

    # Known tables match whatever the case of their names ("Products" is products); two that differ
    # only in case would be one table, so neither is taken.
    same = same_tables(list(tables))
    if same:
        from planner.errors import ScenarioError

        raise ScenarioError([Problem(" and ".join(place(t) for t in names), "name the same table "
                                     "(table names are compared ignoring case and surrounding spaces)",
                                     "keep one: merge the rows into one and delete the other")
                             for names in same])
    tables = {(k.lower() if k.lower() in ORDER else k): t for k, t in tables.items()}
    rd = _Reader(place)
    rd.names = {k: t.name for k, t in tables.items()}
    raw: dict[str, Any] = {}
    if "scenario" in tables:
        for r, rec in rd.records(tables["scenario"], ["key", "value"]):
            k, v = rec.get("key"), rec.get("value")
            if isinstance(k, Unusable):
                rd.problems.append(Problem(rd.at("scenario", r, "key"), *k.problem(as_text=True)))
                continue
            if not isinstance(k, str):
                rd.problems.append(Problem(rd.at("scenario", r, "key"), "is empty", "name the setting"))
                continue
            if k.endswith(":json"):
                k = k.removesuffix(":json")
                try:
                    v = json.loads(v) if isinstance(v, str) else v
                except json.JSONDecodeError as e:
                    rd.problems.append(Problem(rd.at("scenario", r, "value"), f"is not valid JSON ({e.msg})"))
            else:
                v = coerce(k, v)
            if v is None:  # an empty value: the setting is not given (the template's blank name)
                continue
            raw[k] = v
            rd.where[k] = rd.at("scenario", r, "value")
    raw.setdefault("name", default_name)
    if "products" not in tables:  # nothing else can be checked without it
        from planner.errors import ScenarioError

        others = [t.name for k, t in tables.items() if k not in ORDER]
        hint = did_you_mean("products", others)
        raise ScenarioError([Problem(place("products"), "is missing", (f"{hint} " if hint else "")
                                     + "add it with a heading row: " + ", ".join(COLUMNS["products"][:4]) + ", ...")])
    products = rd.entries(tables["products"], "products", "name", ["name"])
    raw["products"] = products
    by_name = {p["name"].strip(): (i, p) for i, p in enumerate(products) if isinstance(p.get("name"), str)}

    def owner(table: str, r: int, col: str, name: Any, names: dict) -> tuple[int, dict] | None:
        key = name.strip() if isinstance(name, str) else name
        if key in names:
            return names[key]
        section = {"option": "options", "variant": "variants"}.get(col, "products")
        hint = did_you_mean(str(name), list(names)) or f"add it to {place(section)} or fix the name"
        what = {"option": "an option", "variant": "a variant"}.get(col, "a product")
        rd.problems.append(Problem(rd.at(table, r, col), f"names {what} that is not defined: {name!r}", hint))
        return None

    def plabel(i: int, p: dict) -> str:
        return f"products[{p['name'].strip()}]" if isinstance(p.get("name"), str) and p["name"].strip() else f"products[{i + 1}]"

    if "usage" in tables:
        t = tables["usage"]
        heads = [str(h).strip().removesuffix(":json") for h in t.header if h is not None and str(h).strip()]
        long = set(heads) <= {"product", "resource", "amount"} and {"resource", "amount"} <= set(heads)
        recs = rd.records(t, ["product", "resource", "amount"] if long else ["product"])
        for r, rec in recs:
            hit = owner(t.name, r, "product", rec.get("product"), by_name) if rec.get("product") is not None else None
            if rec.get("product") is None:
                rd.problems.append(Problem(rd.at(t.name, r, "product"), "is empty", "name the product"))
            if hit is None:
                continue
            i, p = hit
            use = p.setdefault("usage", {})
            pairs = [(rec.get("resource"), rec.get("amount"), "amount")] if long else \
                [(k, v, k) for k, v in rec.items() if k != "product"]
            for res, amount, col in pairs:
                if res is None:
                    rd.problems.append(Problem(rd.at(t.name, r, "resource"), "is empty", "name the resource"))
                    continue
                res = str(res)
                if res in use:
                    rd.problems.append(Problem(rd.at(t.name, r, col), f"gives {p['name']} / {res} a second time",
                                               "keep one amount per product and resource"))
                use[res] = amount
                rd.where.setdefault(f"{plabel(i, p)}.usage.{res}", rd.at(t.name, r, col))
    for tname, key in (("demand", "demand"), ("demand_fit", "demand_fit")):
        if tname not in tables:
            continue
        for r, rec in rd.records(tables[tname], ["product"]):
            hit = owner(tname, r, "product", rec.pop("product", None), by_name)
            if hit is None:
                continue
            i, p = hit
            if key in p:
                rd.problems.append(Problem(rd.at(tname, r), f"is a second {tname} row for {p['name']}", "keep one"))
            spec: dict[str, Any] = {}
            label = f"{plabel(i, p)}.{key}"
            rd.where.setdefault(label, rd.at(tname, r))
            for c, v in rec.items():
                k = "product" if (key == "demand" and c == "history_product") else c
                if key == "demand" and c in POINT_COLS:
                    continue
                spec[k] = v
                rd.where.setdefault(f"{label}.{k}", rd.at(tname, r, c))
            if key == "demand" and any(c in rec for c in POINT_COLS):
                v = [rec.get(c) for c in POINT_COLS]
                spec["points"] = [[v[0], v[1]], [v[2], v[3]]]
                rd.where.setdefault(f"{label}.points", rd.at(tname, r, "price_1 to volume_2"))
            p[key] = spec
    if "resources" in tables:
        raw["resources"] = rd.entries(tables["resources"], "resources", "name", ["name"])
    if "options" in tables:
        opts = rd.entries(tables["options"], "options", "name", ["name"])
        raw["options"] = opts
        names = {o["name"].strip(): (i, o) for i, o in enumerate(opts) if isinstance(o.get("name"), str)}
        if "option_amounts" in tables:
            for r, rec in rd.records(tables["option_amounts"], COLUMNS["option_amounts"][:2]):
                hit = owner("option_amounts", r, "option", rec.get("option"), names)
                if hit is None:
                    continue
                i, o = hit
                for key in ("adds", "adds_up_to"):
                    if rec.get(key) is not None:
                        o.setdefault(key, {})[str(rec.get("resource"))] = rec[key]
                        rd.where.setdefault(f"options[{o['name'].strip()}].{key}.{rec.get('resource')}",
                                            rd.at("option_amounts", r, key))
    elif "option_amounts" in tables:
        rd.problems.append(Problem(place("options"), "is missing but option_amounts is given", "add the options table"))
    if "correlations" in tables:
        cors = []
        for i, (r, rec) in enumerate(rd.records(tables["correlations"], COLUMNS["correlations"])):
            c = {"products": [rec.pop("product_1", None), rec.pop("product_2", None)], **rec}
            label = f"correlations[{i + 1}]"
            rd.where[label] = rd.at("correlations", r)
            rd.where[f"{label}.products"] = rd.at("correlations", r, "product_1")
            rd.where[f"{label}.products.1"] = rd.at("correlations", r, "product_2")
            rd.where[f"{label}.rho"] = rd.at("correlations", r, "rho")
            cors.append(c)
        raw["correlations"] = cors
        rd.where["correlations"] = rd.at("correlations")
    if "variants" in tables:
        raw["variants"] = rd.entries(tables["variants"], "variants", "name", ["name"])
        vnames = {v["name"].strip(): (i, v) for i, v in enumerate(raw["variants"]) if isinstance(v.get("name"), str)}
        for r, rec in rd.records(tables["variant_changes"], ["variant", "field"]) if "variant_changes" in tables else []:
            name = rec.pop("variant", None)
            hit = owner("variant_changes", r, "variant", name, vnames) if name is not None else \
                rd.problems.append(Problem(rd.at("variant_changes", r, "variant"), "is empty", "name the variant"))
            if hit is not None:
                changes = hit[1].setdefault("changes", [])
                label = f"variants[{hit[1]['name'].strip()}].changes[{len(changes) + 1}]"
                rd.where.setdefault(label, rd.at("variant_changes", r))
                rd.where.update({f"{label}.{c}": rd.at("variant_changes", r, c) for c in rec})
                changes.append(rec)
    elif "variant_changes" in tables:
        rd.problems.append(Problem(place("variants"), "is missing but variant_changes is given",
                                   "add the variants table (name, description)"))
    for name, t in tables.items():
        if name not in ORDER or name == "uncertainty":
            raw[name] = rd.entries(t, name, "name", [])
    return ReadResult(raw, rd.locate, rd.problems, base_dir)
