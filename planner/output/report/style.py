"""The report's own look: one palette, one set of chart settings and one way of labelling axes, used by
every chart (the report's and ``planner risk --charts``) and the HTML page.

Colours are chosen for contrast on a warm paper background and stay apart for
the common forms of colour blindness (no red/green pair carries meaning alone:
every mark is labelled with text too).
"""

from __future__ import annotations

from matplotlib.ticker import Formatter

#: Named colours (hex) used across charts and the HTML page.
PALETTE = {
    "ink": "#22313a",        # text, axes
    "muted": "#6f7c85",      # secondary text, grid labels
    "grid": "#e4ddd0",       # grid lines
    "paper": "#fbf8f2",      # page and chart background
    "panel": "#ffffff",      # table and card background
    "revenue": "#2b6f8e",    # revenue curve, running volume bars (deep lake blue)
    "cost": "#b0563a",       # cost curve, losses (terracotta)
    "profit": "#3f7d4e",     # profit curve, profit bars (pine)
    "accent": "#d49a1f",     # the plan's own point, binding limits (ochre)
    "off": "#b9b2a6",        # shut-down products, idle capacity (stone)
    "sweep": "#5a4e8c",      # shadow price in the sweep (plum)
}

#: Matplotlib rc settings applied inside every chart (never globally).
RC = {
    "font.family": "DejaVu Sans",
    "font.size": 9.5,
    "axes.titlesize": 11.5,
    "axes.titleweight": "bold",
    "axes.titlelocation": "left",
    "axes.labelsize": 9.5,
    "axes.labelcolor": PALETTE["ink"],
    "axes.edgecolor": PALETTE["muted"],
    "axes.facecolor": PALETTE["paper"],
    "axes.spines.top": False,
    "axes.spines.right": False,
    "axes.grid": True,
    "axes.grid.axis": "y",
    "grid.color": PALETTE["grid"],
    "grid.linewidth": 0.8,
    "figure.facecolor": PALETTE["paper"],
    "savefig.facecolor": PALETTE["paper"],
    "xtick.color": PALETTE["muted"],
    "ytick.color": PALETTE["muted"],
    "text.color": PALETTE["ink"],
    "legend.frameon": False,
    "legend.fontsize": 8.5,
    "text.parse_math": False,  # a '$' in a name or a currency is text, never the start of a formula
    "svg.fonttype": "path",   # glyphs as paths: the SVG looks the same without the font installed
    "svg.hashsalt": "planner",  # stable ids, so the same plan gives the same SVG
}

def money_axis(ax, currency: str, axis: str = "y") -> None:
    """Tick labels of ``axis`` as amounts: '€250k', '-€1.5M'."""
    (ax.yaxis if axis == "y" else ax.xaxis).set_major_formatter(Ticks(currency))


def count_axis(ax, axis: str = "x") -> None:
    """Tick labels of ``axis`` as quantities with thousands separators: '2,500'."""
    (ax.xaxis if axis == "x" else ax.yaxis).set_major_formatter(Ticks())


class Ticks(Formatter):
    """Tick labels with thousands separators, as many decimals as the tick spacing needs, an optional
    currency prefix, and k / M for large amounts."""

    def __init__(self, currency: str = "") -> None:
        self.currency = currency
        self.decimals = 0
        self.scale = (1.0, "")

    def set_locs(self, locs) -> None:
        super().set_locs(locs)
        locs = sorted(float(x) for x in locs)
        big = max((abs(x) for x in locs), default=0.0)
        self.scale = (1e6, "M") if self.currency and big >= 1e6 else (1e3, "k") if self.currency and big >= 1e4 \
            else (1.0, "")
        scaled = [x / self.scale[0] for x in locs]
        step = min((b - a for a, b in zip(scaled, scaled[1:]) if b > a), default=1.0)
        # The fewest decimals that show every tick exactly (2.5k must not print as 2k).
        self.decimals = next((k for k in range(7) if all(abs(round(x, k) - x) <= 1e-9 * max(step, 1e-12)
                                                         for x in scaled)), 6)

    def __call__(self, x, pos=None) -> str:
        div, suffix = self.scale
        text = f"{abs(x) / div:,.{self.decimals}f}{suffix if x != 0 else ''}"
        sign = "-" if x < 0 and text.strip("0.,kM") else ""
        cur = self.currency
        sep = " " if cur and cur[-1].isalnum() else ""
        return f"{sign}{cur}{sep}{text}" if cur else f"{sign}{text}"


#: CSS of the HTML report, using the same palette.
CSS = f"""
:root {{ --ink:{PALETTE['ink']}; --muted:{PALETTE['muted']}; --paper:{PALETTE['paper']};
        --panel:{PALETTE['panel']}; --grid:{PALETTE['grid']}; --accent:{PALETTE['accent']};
        --profit:{PALETTE['profit']}; --cost:{PALETTE['cost']}; --off:{PALETTE['off']}; }}
* {{ box-sizing:border-box; }}
body {{ margin:0; background:var(--paper); color:var(--ink);
       font:15px/1.45 "DejaVu Sans", "Segoe UI", Helvetica, Arial, sans-serif; }}
main {{ max-width:1080px; margin:0 auto; padding:28px 24px 40px; }}
h1 {{ font-size:26px; margin:0 0 2px; letter-spacing:-0.01em; }}
h2 {{ font-size:18px; margin:34px 0 10px; padding-bottom:4px; border-bottom:2px solid var(--accent); }}
.sub {{ color:var(--muted); margin:0 0 18px; }}
.cards {{ display:grid; grid-template-columns:repeat(auto-fit, minmax(190px, 1fr)); gap:12px; }}
.card {{ background:var(--panel); border-left:5px solid var(--profit); padding:10px 14px; border-radius:3px;
        box-shadow:0 1px 2px rgba(0,0,0,.06); }}
.card.warn {{ border-left-color:var(--accent); }}
.card .k {{ color:var(--muted); font-size:12px; text-transform:uppercase; letter-spacing:.04em; }}
.card .v {{ font-size:22px; font-weight:bold; margin-top:2px; }}
.card .v.long {{ font-size:17px; line-height:1.25; }}
.card .n {{ font-size:13px; color:var(--muted); }}
ul.points, ol.points {{ margin:14px 0 0; padding-left:22px; }}
ul.points li, ol.points li {{ margin:3px 0; }}
table {{ border-collapse:collapse; width:100%; background:var(--panel); font-size:13.5px; }}
th, td {{ padding:5px 9px; border-bottom:1px solid var(--grid); }}
th {{ text-align:left; background:#f1ebdf; font-weight:600; }}
td:first-child {{ white-space:nowrap; }}
td.num, th.num {{ text-align:right; font-variant-numeric:tabular-nums; white-space:nowrap; }}
tr.off td {{ color:var(--muted); }}
tr.bind td:first-child {{ font-weight:bold; }}
.tag {{ display:inline-block; padding:0 6px; border-radius:8px; font-size:12px; }}
.tag.on {{ background:#dcebdc; }} .tag.off {{ background:#ece7de; }} .tag.bind {{ background:#f6e3b8; }}
.scroll {{ overflow-x:auto; }}
figure {{ margin:18px 0; background:var(--panel); padding:10px; border-radius:3px; }}
figure svg {{ width:100%; height:auto; display:block; }}
figcaption {{ color:var(--muted); font-size:13px; margin-top:4px; }}
.grid2 {{ display:grid; grid-template-columns:repeat(auto-fit, minmax(460px, 1fr)); gap:12px; }}
.grid2 figure {{ margin:0; }}
footer {{ margin-top:36px; padding-top:10px; border-top:1px solid var(--grid); color:var(--muted); font-size:12.5px; }}
footer code {{ font-size:12px; word-break:break-all; }}
.note {{ font-size:13px; color:var(--muted); }}
@media print {{ body {{ background:white; }} figure, .card {{ box-shadow:none; }} h2 {{ break-after:avoid; }}
               figure {{ break-inside:avoid; }} }}
"""
