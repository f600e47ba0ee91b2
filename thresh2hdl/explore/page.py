"""An exploration's results as files: front.json (everything), front.csv (a row a finished
point) and front.html (one self-contained page: scatter plots of accuracy against logic cells,
results per second and latency, the front and the recommended point marked; no script, no
network)."""

import csv
import io
import json
from html import escape

from .front import point_label

__all__ = ["front_json", "front_csv", "front_html", "CSV_COLUMNS"]

CSV_COLUMNS = ("key", "weight_bits", "digit_budget", "arch", "pipeline", "split_bits",
               "device", "placement_seed", "accuracy", "logic_cells", "lut4_equivalents",
               "flip_flops", "fmax_mhz", "results_per_s", "latency_cycles", "latency_ns",
               "digits_total", "on_front", "recommended")

_STYLE = """
body{font:14px/1.45 system-ui,sans-serif;margin:2em auto;max-width:64em;color:#222}
h1{font-size:1.5em}h2{font-size:1.15em;margin-top:1.6em;border-bottom:1px solid #ccc}
table{border-collapse:collapse;margin:.5em 0;font-size:13px}td,th{border:1px solid #ccc;
padding:2px 8px;text-align:right;white-space:nowrap}th{background:#f3f3f3}.l{text-align:left}
.wide{overflow-x:auto}svg text{font:11px system-ui,sans-serif}.rec{background:#eef7ee}
"""


def front_json(summary):
    return json.dumps(summary, indent=1, sort_keys=True) + "\n"


def _flags(summary, row):
    front = set(summary["front"])
    return {"on_front": row["key"] in front, "recommended": row["key"] == summary["recommended"]}


def front_csv(summary):
    out = io.StringIO()
    writer = csv.writer(out, lineterminator="\n")
    writer.writerow(CSV_COLUMNS)
    for row in summary["points"]:
        full = {**row, **_flags(summary, row)}
        writer.writerow(["" if full.get(c) is None else full[c] for c in CSV_COLUMNS])
    return out.getvalue()


def _scatter(rows, x_key, y_key, *, label_x, label_y, front, recommended, log_x=False):
    """Every point a dot: on the front filled, else hollow; the recommended one ringed."""
    import math
    width, height, left, top = 420, 240, 58, 14
    scale = (lambda v: math.log10(max(v, 1e-12))) if log_x else (lambda v: v)
    xs = [scale(r[x_key]) for r in rows]
    ys = [r[y_key] for r in rows]
    x_lo, x_hi = min(xs), max(xs)
    y_lo, y_hi = min(ys), max(ys)
    x_hi, y_hi = (x_hi if x_hi > x_lo else x_lo + 1), (y_hi if y_hi > y_lo else y_lo + 0.01)
    x_pad, y_pad = (x_hi - x_lo) * 0.06, (y_hi - y_lo) * 0.08   # no dot on the frame
    x_lo, x_hi, y_lo, y_hi = x_lo - x_pad, x_hi + x_pad, y_lo - y_pad, y_hi + y_pad
    px = lambda v: left + (v - x_lo) / (x_hi - x_lo) * width
    py = lambda v: top + height - (v - y_lo) / (y_hi - y_lo) * height
    parts = [f'<rect x="{left}" y="{top}" width="{width}" height="{height}" fill="none" '
             f'stroke="#999"/>']
    for value, anchor in ((x_lo + x_pad, "middle"), (x_hi - x_pad, "middle")):
        shown = 10 ** value if log_x else value
        parts.append(f'<text x="{px(value):.1f}" y="{top + height + 14}" text-anchor="{anchor}"'
                     f'>{shown:,.4g}</text>')
    for value in (y_lo + y_pad, y_hi - y_pad):
        parts.append(f'<text x="{left - 4}" y="{py(value) + 4:.1f}" text-anchor="end">'
                     f'{value:.4g}</text>')
    parts.append(f'<text x="{left + width / 2}" y="{top + height + 30}" text-anchor="middle">'
                 f'{escape(label_x)}</text>')
    parts.append(f'<text x="12" y="{top + height / 2}" text-anchor="middle" transform="rotate('
                 f'-90 12 {top + height / 2})">{escape(label_y)}</text>')
    for row, x, y in sorted(zip(rows, xs, ys), key=lambda t: t[0]["key"] in front):
        on = row["key"] in front
        parts.append(f'<circle cx="{px(x):.1f}" cy="{py(y):.1f}" r="4" '
                     f'fill="{"#1f5fa8" if on else "none"}" stroke="{"#1f5fa8" if on else "#888"}">'
                     f'<title>{escape(point_label(row))}</title></circle>')
        if row["key"] == recommended:
            parts.append(f'<circle cx="{px(x):.1f}" cy="{py(y):.1f}" r="9" fill="none" '
                         f'stroke="#176117" stroke-width="2"/>')
    return (f'<svg xmlns="http://www.w3.org/2000/svg" width="{left + width + 20}" '
            f'height="{top + height + 40}" role="img" aria-label="{escape(label_y)} against '
            f'{escape(label_x)}">' + "".join(parts) + "</svg>")


def _table(headers, rows, marked=()):
    head = "".join(f"<th class=l>{escape(h)}</th>" if i == 0 else f"<th>{escape(h)}</th>"
                   for i, h in enumerate(headers))
    body = "".join(f"<tr{' class=rec' if i in marked else ''}>" + "".join(
        f"<td class=l>{escape(str(c))}</td>" if j == 0 else f"<td>{escape(str(c))}</td>"
        for j, c in enumerate(row)) + "</tr>" for i, row in enumerate(rows))
    return f"<div class=wide><table><tr>{head}</tr>{body}</table></div>"


def _point_rows(rows, recommended):
    table = [[point_label(r), f"{r['accuracy']:.4f}", r["logic_cells"], r["flip_flops"],
              f"{r['fmax_mhz']:.1f}", f"{r['results_per_s']:,.0f}", r["latency_cycles"],
              f"{r['latency_ns']:.1f}"] for r in rows]
    marked = {i for i, r in enumerate(rows) if r["key"] == recommended}
    return _table(["point", "accuracy", "logic cells", "flip-flops", "fmax MHz",
                   "results/s", "latency cycles", "latency ns"], table, marked)


def front_html(summary):
    """The page: what was explored, the plots, the front, every point, the failed ones."""
    rows, front, recommended = summary["points"], set(summary["front"]), summary["recommended"]
    chosen = next(r for r in rows if r["key"] == recommended)
    plot = dict(front=front, recommended=recommended)
    verification = summary["verification"]
    out = ["<!DOCTYPE html><html lang=en><head><meta charset=utf-8>"
           "<title>thresh2hdl exploration</title>"
           f"<style>{_STYLE}</style></head><body>", "<h1>Design space explored</h1>",
           f"<p>{len(rows)} finished point(s) of {summary['grid_points']} in the grid, "
           f"{len(summary['failed'])} failed, {len(summary['skipped'])} skipped as designs "
           f"the options do not allow. Accuracy is on {summary['data']['held_out_rows']} "
           f"held-out rows of {escape(summary['data']['file'])}; each point was verified in "
           f"{escape(verification['simulator'])} on its corner cases and "
           f"{verification['random_vectors']:,} random vectors (fewer than a build's "
           f"default) and placed by nextpnr with its seed.</p>",
           "<h2>Recommended</h2>",
           f"<p><b>{escape(point_label(chosen))}</b>: accuracy {chosen['accuracy']:.4f}, "
           f"{chosen['logic_cells']} logic cells, {chosen['fmax_mhz']:.1f} MHz. Its build "
           f"folder: <code>{escape(summary['recommended_folder'])}/</code>. Chosen as the "
           f"fewest logic cells meeting {escape(_constraints_text(summary['constraints']))}."
           f"</p>", "<h2>Accuracy against cost</h2>",
           "<p>Filled: on the front (no other point is at least as good on accuracy, logic "
           "cells, results per second and latency, and better on one); ringed: recommended."
           "</p>",
           _scatter(rows, "logic_cells", "accuracy", label_x="logic cells",
                    label_y="held-out accuracy", **plot),
           _scatter(rows, "results_per_s", "accuracy", label_x="results per second (log)",
                    label_y="held-out accuracy", log_x=True, **plot),
           _scatter(rows, "logic_cells", "latency_ns", label_x="logic cells",
                    label_y="latency (ns)", **plot),
           "<h2>The front</h2>", _point_rows([r for r in rows if r["key"] in front],
                                             recommended),
           "<h2>Every finished point</h2>", _point_rows(rows, recommended)]
    if summary["failed"]:
        out += ["<h2>Failed points</h2>",
                _table(["point", "error"], [[f["what"], f["error"]] for f in summary["failed"]])]
    if summary["skipped"]:
        out += ["<h2>Skipped</h2>",
                _table(["point", "why"], [[s["what"], s["reason"]] for s in summary["skipped"]])]
    out.append("</body></html>\n")
    return "\n".join(out)


def _constraints_text(constraints):
    words = {"min_accuracy": "accuracy at least {}", "min_fmax_mhz": "fmax at least {} MHz",
             "device": "device {}", "max_latency_ns": "latency at most {} ns"}
    given = [words[k].format(v) for k, v in constraints.items() if v is not None]
    return ", ".join(given) if given else "no constraint (none was given)"
