"""The report's risk part (``planner report --risk N``): one sentence for the summary, a section of the
page and the rows of the workbook's Risk sheet, all from the risk summary (``RiskResult.to_dict()``).

Amounts in the plan's currency per period.  The Monte Carlo interval is the 95 % interval of the
expected profit: ± 1.96 standard errors of the mean (normal approximation, common practice).
"""

from __future__ import annotations

from html import escape
from typing import Any

from planner.output.report.context import ReportContext
from planner.output.report.fmt import money

#: Two-sided 95 % quantile of the standard normal distribution.
Z95 = 1.96


def _m(x: float | None, c: str) -> str:
    return "—" if x is None else money(x, c)


def _robust(r: dict[str, Any], c: str) -> str:
    """The robust choice in one plain sentence ('' if there is none)."""
    rc = r.get("robust_choice") or {}
    best, pt = rc.get("best"), rc.get("point_plan")
    if not best or not pt:
        return ""
    n = len(rc.get("candidates", []))
    if best.get("is_point_plan"):
        return (f"Robust choice: of {n} candidate slates, the plan's own earns most on average over the "
                "samples.")
    return (f"Robust choice: of {n} candidate slates, running {', '.join(best['running'])} averages "
            f"{_m(best['expected_profit'], c)} against the plan's {_m(pt['expected_profit'], c)}; on independent "
            f"check samples {_m(best.get('expected_profit_check'), c)} against "
            f"{_m(pt.get('expected_profit_check'), c)} (the in-sample winner is flattered, the check is not).")


def risk_sentence(ctx: ReportContext) -> str:
    """The summary's bullet (HTML): chance of a loss and the P5/P50/P95 of the plan's profit."""
    r, c = ctx.risk or {}, ctx.currency
    pp = r.get("plan_profit", {})
    loss = r.get("probability_of_loss", 0.0)
    return (f"Risk over {r.get('samples', 0):,} samples: chance of a loss <b>{100 * loss:.1f} %</b>; the plan's "
            f"profit P5 {escape(_m(pp.get('p5'), c))}, P50 {escape(_m(pp.get('p50'), c))}, P95 "
            f"{escape(_m(pp.get('p95'), c))} (see Risk below).")


def risk_section(ctx: ReportContext, figures: str) -> str:
    """The Risk section of the page; ``figures``: the risk charts' HTML."""
    r, c = ctx.risk or {}, ctx.currency
    if not r:
        return ""
    n, per = r.get("samples", 0), ctx.plan.period
    pp, bp = r.get("plan_profit", {}), r.get("best_profit", {})
    loss = r.get("probability_of_loss", 0.0)
    half = Z95 * pp["se"] if pp.get("se") is not None else None
    rows = [
        ("chance of a loss (profit below 0)", f"{100 * loss:.1f} % ({round(loss * n):,} of {n:,} samples)"),
        ("expected profit, prices kept", f"{_m(pp.get('mean'), c)}" + (f" (95 % Monte Carlo interval ± "
                                                                       f"{_m(half, c)})" if half is not None else "")),
        ("P5 / P50 / P95 of the plan's profit", " / ".join(_m(pp.get(k), c) for k in ("p5", "p50", "p95"))),
        ("re-optimised per sample: P5 / P50 / P95", " / ".join(_m(bp.get(k), c) for k in ("p5", "p50", "p95"))),
        ("value of perfect information", _m(r.get("value_of_perfect_information"), c)),
        ("point estimate (the plan above)", _m(r.get("point_estimate_profit"), c)),
    ]
    body = "".join(f"<tr><td>{escape(k)}</td><td class=\"num\">{escape(v)}</td></tr>" for k, v in rows)
    table = (f'<div class="scroll"><table><thead><tr><th>per {escape(per)}</th><th class="num">value</th></tr>'
             f"</thead><tbody>{body}</tbody></table></div>")
    fragile = [p for p in r.get("products", []) if p.get("probability_running") is not None
               and (0.1 < p["probability_running"] < 0.9 or p["planned_running"] != (p["probability_running"] >= 0.5))]
    notes = []
    if fragile:
        notes.append("Fragile run/stop decisions (they change in many samples): " + ", ".join(
            f"{escape(p['name'])} (runs in {100 * p['probability_running']:.0f} % of samples)" for p in fragile) + ".")
    robust = _robust(r, c)
    if robust:
        notes.append(escape(robust))
    if not (r.get("run") or {}).get("uncertain_numbers"):
        notes.append("The scenario has no 'uncertainty' entries: every sample is the point estimate.")
    skipped = r.get("samples_infeasible", 0) + r.get("samples_not_certified", 0)
    if skipped:
        notes.append(f"{skipped:,} samples are left out of the re-optimised figures "
                     f"({r.get('samples_infeasible', 0):,} infeasible, {r.get('samples_not_certified', 0):,} not "
                     "certified).")
    items = "".join(f"<li>{x}</li>" for x in notes)
    return (f'<section id="risk"><h2>Risk under uncertainty</h2>{table}'
            + (f'<ul class="points">{items}</ul>' if items else "")
            + f'<p class="note">{n:,} Monte Carlo samples (seed {r.get("seed", 0)}) of the scenario\'s uncertain '
              "numbers. The plan under a sample keeps its prices; its volumes follow the sample's demand at those "
              "prices, up to the planned volumes. Profits include every fixed cost.</p>"
            + f'<div class="grid2">{figures}</div></section>')


def risk_rows(ctx: ReportContext) -> list[list[Any]]:
    """Rows (item, value, meaning, kind) of the workbook's Risk sheet; unrounded values; kind is 'money',
    'share' (0..1) or '' (the number format to use)."""
    r, c = ctx.risk or {}, ctx.currency
    if not r:
        return []
    per = f"{c} per {ctx.plan.period}"
    pp, bp = r.get("plan_profit", {}), r.get("best_profit", {})
    rows: list[list[Any]] = [
        ["samples", r.get("samples"), f"Monte Carlo samples, seed {r.get('seed')}", ""],
        ["chance of a loss", r.get("probability_of_loss"), "share of samples in which the plan's profit is below 0",
         "share"],
    ]
    for k, what in (("mean", "expected"), ("se", "standard error of the mean"), ("p5", "P5"), ("p50", "P50"),
                    ("p95", "P95")):
        rows.append([f"plan profit: {what}", pp.get(k), f"{per}, prices kept", "money"])
    if pp.get("se") is not None:
        rows.append(["plan profit: 95 % Monte Carlo half-width", Z95 * pp["se"], f"{per}, 1.96 × standard error",
                     "money"])
    for k in ("p5", "p50", "p95", "mean"):
        rows.append([f"re-optimised profit: {k.upper() if k != 'mean' else 'expected'}", bp.get(k), per, "money"])
    rows.append(["value of perfect information", r.get("value_of_perfect_information"), per, "money"])
    rc = r.get("robust_choice") or {}
    if rc.get("best") and rc.get("point_plan"):
        rows.append(["robust choice: running", ", ".join(rc["best"]["running"]) or "none",
                     "candidate slate of greatest expected profit", ""])
        rows.append(["robust choice: expected profit", rc["best"]["expected_profit"], per, "money"])
        rows.append(["robust choice: on check samples", rc["best"].get("expected_profit_check"), per, "money"])
        rows.append(["plan's slate: expected profit", rc["point_plan"]["expected_profit"], per, "money"])
        rows.append(["plan's slate: on check samples", rc["point_plan"].get("expected_profit_check"), per, "money"])
    for p in r.get("products", []):
        rows.append([f"P(running): {p['name']}", p.get("probability_running"), "share of re-optimised samples",
                     "share"])
    return rows
