"""report.html (one self-contained file, inline SVG, no network) and report.md, from report.json.

Both are made from the same report dictionary as report.json, so the three never disagree.
"""

from html import escape

from ..cost import CELL_NAMES
from .report import (cost_text, estimate_facts, estimates_of, levels_text, shortfall_text,
                     stages_text)

__all__ = ["report_html", "report_markdown"]

_STYLE = """
body{font:14px/1.45 system-ui,sans-serif;margin:2em auto;max-width:60em;color:#222}
h1{font-size:1.5em}h2{font-size:1.15em;margin-top:1.6em;border-bottom:1px solid #ccc}
table{border-collapse:collapse;margin:.5em 0;font-size:13px}td,th{border:1px solid #ccc;
padding:2px 8px;text-align:right;white-space:nowrap}.wide{overflow-x:auto}th{background:#f3f3f3}td.l,th.l{text-align:left}
.caution{border:2px solid #b35900;background:#fff4e5;padding:.6em 1em}
.ok{color:#176117;font-weight:bold}.bad{color:#a00;font-weight:bold}.warn{color:#8a5a00;font-weight:bold}
svg text{font:11px system-ui,sans-serif}code{background:#f3f3f3;padding:0 3px}
@media print{.caution{break-inside:avoid}}
"""


def _split_text(report):
    """How the adders are split, or None."""
    tree = report["tree"]
    if not tree.get("split_bits"):
        return None
    if not tree.get("split_adders", 1):
        return f"no adder wider than {tree['split_bits']} bits: none split"
    return (f"{tree.get('split_adders', 'adders')} adders in parts of {tree['split_bits']} "
            f"bits, {tree.get('carry_registers', 1)} register(s) on each carry; the result "
            f"in {tree.get('result_parts', 2)} part(s)")


def _table(headers, rows):
    head = "".join(f"<th{' class=l' if i == 0 else ''}>{escape(str(h))}</th>"
                   for i, h in enumerate(headers))
    body = "".join("<tr>" + "".join(f"<td{' class=l' if i == 0 else ''}>{escape(str(c))}</td>"
                                    for i, c in enumerate(row)) + "</tr>" for row in rows)
    return f"<table><tr>{head}</tr>{body}</table>"


TREE_PICTURE_MOST = 160      # values per unit drawn as a tree; larger ones: the levels table


def _capacity(node):
    bits = node["bits"]
    return (-(1 << (bits - 1)), (1 << (bits - 1)) - 1) if node["signed"] else (0, (1 << bits) - 1)


def _tree_picture(nodes, stages, label):
    """One unit's datapath as a tree, level 0 on the left: each value a box with its name,
    width and exact range, a strip under it placing the range inside what the width holds,
    lines to the operands (a minus where one is subtracted), register stages dashed."""
    box_w, box_h, pitch, gap, top = 150, 40, 48, 44, 34
    by_name = {node["name"]: node for node in nodes}
    readers = {child for node in nodes for child in node.get("children", [])}
    rows, y = {}, [0]

    def place(name):                  # leaves in reading order, a value between its operands
        if name in rows:
            return rows[name]
        children = [c for c in by_name[name].get("children", []) if c in by_name]
        rows[name] = (sum(place(c) for c in children) / len(children)) if children else y[0]
        y[0] += 0 if children else 1
        return rows[name]

    for node in nodes:
        if node["name"] not in readers:
            place(node["name"])
    first = min(node["level"] for node in nodes)
    last = max(node["level"] for node in nodes)
    col = lambda level: 4 + (level - first) * (box_w + gap)
    row = lambda name: top + rows[name] * pitch
    parts = [f'<text x="{col(level)}" y="12">level {level}</text>'
             for level in range(first, last + 1)]
    for stage in stages:
        after = stage["levels"][1]
        if first <= after <= last:
            x = col(after) + box_w + gap / 2
            parts.append(f'<line class="stage" x1="{x:.1f}" y1="16" x2="{x:.1f}" '
                         f'y2="{top + y[0] * pitch}" stroke="#b35900" stroke-dasharray="4 3"/>'
                         f'<text x="{x + 3:.1f}" y="26" fill="#b35900">reg {stage["stage"]}</text>')
    for node in nodes:
        x, top_y = col(node["level"]), row(node["name"])
        minus = {"sub": 1, "rsub": 0}.get(node["kind"])
        for k, child in enumerate(node.get("children", [])):
            if child not in by_name:
                continue
            x0, y0 = col(by_name[child]["level"]) + box_w, row(child) + box_h / 2
            y1 = top_y + box_h / 2
            parts.append(f'<path class="edge" d="M{x0:.1f} {y0:.1f}H{x - gap / 2:.1f}V{y1:.1f}'
                         f'H{x:.1f}" fill="none" stroke="#777"/>')
            if k == minus or (node["kind"] == "bias" and by_name[child].get("sign", 1) < 0):
                parts.append(f'<text x="{x - 10:.1f}" y="{y1 - 3:.1f}">\u2212</text>')
        lo, hi = node["range"]
        cap_lo, cap_hi = _capacity(node)
        span = (cap_hi - cap_lo) or 1
        x0 = x + 4 + (lo - cap_lo) / span * (box_w - 8)
        x1 = x + 4 + (hi - cap_lo) / span * (box_w - 8)
        parts.append(f'<g class="node"><title>{escape(node["name"])}: {escape(node["kind"])}, '
                     f'{node["bits"]} bits, [{lo}, {hi}] of [{cap_lo}, {cap_hi}]</title>'
                     f'<rect x="{x}" y="{top_y:.1f}" width="{box_w}" height="{box_h}" rx="4" '
                     f'fill="#f7f9fc" stroke="#4a7ebb"/><text x="{x + 5}" y="{top_y + 13:.1f}">'
                     f'<tspan font-weight="bold">{escape(node["name"])}</tspan> '
                     f'{node["bits"]} bits</text><text x="{x + 5}" y="{top_y + 26:.1f}">'
                     f'[{lo}, {hi}]</text><rect x="{x + 4}" y="{top_y + 31:.1f}" '
                     f'width="{box_w - 8}" height="4" fill="#ddd"/><rect x="{x0:.1f}" '
                     f'y="{top_y + 31:.1f}" width="{max(1.0, x1 - x0):.1f}" height="4" '
                     f'fill="#4a7ebb"/></g>')
    width = col(last) + box_w + gap + 40
    height = top + y[0] * pitch
    return (f'<svg xmlns="http://www.w3.org/2000/svg" width="{width}" height="{height}" '
            f'role="img" aria-label="{escape(label)}">{"".join(parts)}</svg>')


def _levels_table(report):
    """Each level: what it holds, how many values, their widths, its register stage."""
    tree = report["tree"]
    names = tree.get("level_names") or []
    nodes = tree["nodes"]
    stages = tree.get("stages") or []
    argmax = tree.get("argmax") or []
    rows = []
    for level, name in enumerate(names):
        values = [n for n in nodes if n["level"] == level]
        bits = sorted({n["bits"] for n in values})
        count = len(values) + sum(1 for c in argmax if c.get("level") == level)
        stage = next((s for s in stages if s["levels"][0] <= level <= s["levels"][1]), None)
        widths = "" if not bits else f"{bits[0]}" if len(bits) == 1 else f"{bits[0]}-{bits[-1]}"
        rows.append([level, name, count, widths,
                     "none (combinational)" if stage is None else stage["stage"],
                     f"register stage {stage['stage']}" if stage and stage["levels"][1] == level
                     else ""])
    return _table(["level", "holds", "values", "bits", "stage", "followed by"], rows)


def _entry(comparison, side):
    """One input of an argmax comparison and the classes it may carry."""
    classes = comparison[f"{side}_classes"]
    return (f"{comparison[side]} (class{'es' if len(classes) > 1 else ''} "
            f"{', '.join(classes)})")


def _datapath_html(report):
    """The levels, each unit's tree, and a bank's argmax comparisons."""
    tree = report["tree"]
    if "level_names" not in tree:          # a report of an older version
        return _table(["node", "bits", "range"], [[n["name"], n["bits"],
                                                  f"[{n['range'][0]}, {n['range'][1]}]"]
                                                 for n in tree["nodes"]])
    out = [_levels_table(report)]
    units = report.get("units") or [{"name": None}]
    for k, unit in enumerate(units):
        nodes = [n for n in tree["nodes"] if n.get("unit") == unit["name"]]
        what = "datapath" if unit["name"] is None else f"unit {unit['name']}"
        if not nodes:
            out.append(f"<p>{escape(what)}: every weight is 0; the score is the bias.</p>")
            continue
        if len(nodes) > TREE_PICTURE_MOST:
            out.append(f"<p>{escape(what)}: {len(nodes)} values, too many to draw; each is "
                       f"in report.json and report.md.</p>")
            continue
        picture = f"<div class=wide>{_tree_picture(nodes, tree.get('stages', []), what)}</div>"
        if unit["name"] is not None:
            picture = (f"<details{' open' if k == 0 else ''}><summary>{escape(what)} (class "
                       f"{escape(str(unit.get('class_label')))}): {len(nodes)} values"
                       f"</summary>{picture}</details>")
        out.append(picture)
    if tree.get("argmax"):
        out += ["<h3>Argmax</h3>", "<p>Each comparison takes its left input when left &ge; "
                "right, so a tie goes to the lower class index; the last one gives the "
                "decision.</p>",
                "<div class=wide>" + _table(["comparison", "level", "stage", "left", "right",
                                             "on a tie", "Verilog"],
                       [[c["name"], "after the scores" if c["level"] is None else c["level"],
                         "-" if c["stage"] is None else c["stage"], _entry(c, "left"),
                         _entry(c, "right"), c["ties_to"], c["verilog"]]
                        for c in tree["argmax"]]) + "</div>"]
    return "\n".join(out)


def _score_line(report):
    lo, hi = report["score_range"]
    seen = (report.get("data") or {}).get("score_seen")
    width, left = 600, 20
    span = (hi - lo) or 1
    pos = lambda v: left + (v - lo) / span * width
    parts = [f'<rect x="{left}" y="20" width="{width}" height="14" fill="#dde6f3" '
             f'stroke="#4a7ebb"/><text x="{left}" y="14">declared inputs: [{lo}, {hi}]</text>']
    if seen:
        parts.append(f'<rect x="{pos(seen[0]):.1f}" y="40" width="{max(1, pos(seen[1]) - pos(seen[0])):.1f}" '
                     f'height="10" fill="#8a8"/><text x="{left}" y="66">seen on data: '
                     f'[{seen[0]:g}, {seen[1]:g}]</text>')
    if lo <= 0 <= hi and not report.get("units"):
        parts.append(f'<line x1="{pos(0):.1f}" y1="14" x2="{pos(0):.1f}" y2="54" '
                     f'stroke="#a00" stroke-width="2"/><text x="{pos(0) + 4:.1f}" y="54">'
                     f'threshold (score &gt; 0)</text>')
    return (f'<svg xmlns="http://www.w3.org/2000/svg" width="{left + width + 140}" height="72" '
            f'role="img" aria-label="score range">{"".join(parts)}</svg>')


def _histogram(data, histogram=None, *, aria="score histogram per class", title="",
               threshold=True, width=600, height=150, legend="class {}"):
    histogram = histogram or data.get("histogram")
    if not histogram:
        return ""
    edges, counts = histogram["edges"], histogram["counts"]
    colours = ["#4a7ebb", "#c0504d", "#9bbb59", "#8064a2"]
    top = max(max(c) for c in counts.values()) or 1
    left = 20
    bar = width / (len(edges) - 1)
    parts = []
    for k, (label, values) in enumerate(counts.items()):
        for i, value in enumerate(values):
            h = value / top * height
            parts.append(f'<rect x="{left + i * bar + k * bar / len(counts):.1f}" '
                         f'y="{10 + height - h:.1f}" width="{bar / len(counts):.1f}" '
                         f'height="{h:.1f}" fill="{colours[k % len(colours)]}"/>')
        parts.append(f'<text x="{left + width + 8}" y="{20 + 14 * k}" '
                     f'fill="{colours[k % len(colours)]}">{escape(legend.format(label))}</text>')
    if title:
        parts.append(f'<text x="{left}" y="9">{escape(title)}</text>')
    lo, hi = edges[0], edges[-1]
    if threshold and lo <= 0 <= hi:
        x = left + (0 - lo) / ((hi - lo) or 1) * width
        parts.append(f'<line x1="{x:.1f}" y1="5" x2="{x:.1f}" y2="{height + 12}" stroke="#a00"/>')
    parts.append(f'<text x="{left}" y="{height + 26}">score {lo:g} .. {hi:g}</text>')
    return (f'<svg xmlns="http://www.w3.org/2000/svg" width="{left + width + 110}" '
            f'height="{height + 32}" role="img" aria-label="{escape(aria)}">'
            f'{"".join(parts)}</svg>')


def _unit_histograms(data):
    """A bank's scores on the data: per unit, its own class's rows against the others'."""
    panels = [_histogram(data, h, aria=f"score histogram of unit {h['unit']}",
                         title=f"unit {h['unit']}", threshold=False, width=270, height=70,
                         legend="{}") for h in data.get("unit_histograms") or []]
    if not panels:
        return ""
    return ("<p>Each unit's score on the rows of its own class and on the other rows: the "
            "argmax decides well where the first lies to the right of the second.</p>"
            + "".join(panels))


def _polyline_chart(series, *, label_x, label_y, y_max=None, y_min=0.0):
    """Lines over 0..n-1 (one per series), with axis labels; for small report charts."""
    width, height, left, top = 560, 150, 40, 10
    colours = ["#4a7ebb", "#c0504d", "#9bbb59", "#8064a2", "#f79646"]
    longest = max((len(values) for _, values in series), default=1)
    highest = y_max if y_max is not None else max((max(v) for _, v in series if v), default=1)
    span = (highest - y_min) or 1
    parts = []
    for k, (name, values) in enumerate(series):
        points = " ".join(f"{left + i / max(1, longest - 1) * width:.1f},"
                          f"{top + height - (v - y_min) / span * height:.1f}"
                          for i, v in enumerate(values))
        colour = colours[k % len(colours)]
        parts.append(f'<polyline fill="none" stroke="{colour}" stroke-width="1.5" '
                     f'points="{points}"/><text x="{left + width + 8}" y="{top + 12 + 13 * k}" '
                     f'fill="{colour}">{escape(str(name))}</text>')
    parts.append(f'<rect x="{left}" y="{top}" width="{width}" height="{height}" fill="none" '
                 f'stroke="#999"/><text x="{left}" y="{top + height + 14}">{escape(label_x)}'
                 f'</text><text x="0" y="{top + 10}">{highest:g}</text>'
                 f'<text x="0" y="{top + height}">{y_min:g}</text>'
                 f'<text x="{left + 4}" y="{top + 12}">{escape(label_y)}</text>')
    return (f'<svg xmlns="http://www.w3.org/2000/svg" width="{left + width + 110}" '
            f'height="{top + height + 22}" role="img" aria-label="{escape(label_y)}">'
            f'{"".join(parts)}</svg>')


def report_html(report):
    """The report as one self-contained HTML page."""
    v = report["verification"]
    ok = report["mismatches"] == 0
    out = [f"<!DOCTYPE html><html lang=en><head><meta charset=utf-8>"
           f"<title>{escape(report['module'])}: thresh2hdl report</title>"
           f"<style>{_STYLE}</style></head><body>",
           f"<h1>{escape(report['module'])}</h1>",
           f"<p class=caution><b>Caution.</b> {escape(report['caution'])}</p>",
           f"<p>Built by thresh2hdl {escape(report['tool_versions']['thresh2hdl'])} from the model "
           f"with sha256 <code>{escape(report['model_sha256'])}</code>.</p>",
           "<h2>Inputs and weights</h2>"]
    weights = report["weights"] if report.get("units") else [report["weights"]]
    names = [u["name"] for u in report.get("units", [])] or ["weight"]
    rows = []
    for j, (feature, rng) in enumerate(zip(report["features"], report["feature_ranges"])):
        kind = f"{'signed' if feature['signed'] else 'unsigned'} {feature['bits']}-bit"
        rows.append([feature["name"], kind, f"[{rng[0]}, {rng[1]}]"] + [w[j] for w in weights])
    biases = report["bias"] if report.get("units") else [report["bias"]]
    rows.append(["bias", "", ""] + biases)
    table = _table(["feature", "format", "declared range"] + names, rows)
    if len(rows) > 17:
        table = (f"<details><summary>{len(rows) - 1} features x {len(names)} unit(s): show the "
                 f"table</summary><div class=wide>{table}</div></details>")
    out.append(f"<div class=wide>{table}</div>")
    out.append(_guard_html(report.get("input_guard")))
    out += ["<h2>Sizes</h2>", _table(["", "value"], [
        ["score range", f"[{report['score_range'][0]}, {report['score_range'][1]}]"],
        ["score bits (fewest that fit)", report["score_bits_min"]],
        ["score port bits", report["score_bits"]], ["headroom bits", report["headroom_bits"]],
        ["architecture", report["tree"]["arch"]], ["latency (cycles)", report["latency_cycles"]],
        ["valid beats per result", report.get("beats_per_result", 1)],
        ["levels", levels_text(report["tree"]) if "level_names" in report["tree"] else
         report["tree"]["levels"]], ["register stages", stages_text(report)],
        *([["split adders", _split_text(report)]] if _split_text(report) else [])]),
        "<h3>Score range</h3>", _score_line(report),
        "<h3>Datapath</h3>", _datapath_html(report)]
    out += ["<h2>Verification</h2>",
            f"<p class={'ok' if ok else 'bad'}>{report['vectors_checked']} vectors over "
            f"{v['cycles']} cycles in {escape(v['simulator_version'])}: "
            f"{report['mismatches']} mismatches</p>",
            _table(["vector group", "count"], v["vector_groups"])]
    if v["first_mismatches"]:
        out.append("<ul>" + "".join(f"<li>{escape(m)}</li>" for m in v["first_mismatches"])
                   + "</ul>")
    out.append(f"<p>Testbench for any Verilog-2001 simulator: <code>"
               f"{escape(report['testbench']['command'])}</code></p>")
    data = report.get("data")
    if data:
        confusion = data["confusion"]
        out += ["<h2>Data</h2>", f"<p>Accuracy on {escape(data['file'])}: "
                f"{data['accuracy']:.4f} over {data['rows']} rows.</p>",
                "<p>Confusion (rows: true class, columns: decided class)</p>",
                _table(["true \\ decided"] + confusion["labels"],
                       [[label] + row for label, row in zip(confusion["labels"],
                                                            confusion["rows_true_columns_predicted"])]),
                _histogram(data), _unit_histograms(data)]
    training = report.get("training")
    if training and training.get("mistakes_per_epoch"):
        curves = training["mistakes_per_epoch"][:5]
        names = [u["name"] for u in report.get("units", [])] or ["unit"]
        out += ["<h2>Training</h2>", f"<p>From {escape(training['log'])}: train accuracy "
                f"{training['train_accuracy']:.4f}"
                + (f", held-out {training['holdout_accuracy']:.4f}"
                   if training.get("holdout_accuracy") is not None else "") + ".</p>",
                _polyline_chart(list(zip(names, curves)), label_x="epoch",
                                label_y="mistakes per epoch")]
    quantization = report.get("quantization")
    if quantization and quantization.get("sweep"):
        sweep = quantization["sweep"]
        series = [("agreement", [row["agreement"] for row in sweep])]
        if sweep[0].get("accuracy") is not None:
            series.append(("accuracy", [row["accuracy"] for row in sweep]))
        out += ["<h2>Quantization</h2>", f"<p>From {escape(quantization['log'])}: "
                f"{quantization['bits']}-bit weights chosen; recommended "
                f"{quantization['recommended_bits']}.</p>",
                _polyline_chart(series, label_x=f"weight bits {sweep[0]['bits']} .. "
                                f"{sweep[-1]['bits']}", label_y="against the float model",
                                y_max=1.0, y_min=min(min(v) for _, v in series))]
    out += ["<h2>Cost</h2>", _cost_html(estimates_of(report))]
    out += ["<h2>Proof</h2>", _proof_html(report.get("proof")),
            _netlist_proofs_html(report.get("netlist_proofs"))]
    out.append("</body></html>\n")
    return "\n".join(out)


def _guard_text(guard):
    port = f" (output {guard['flag_port']})" if guard["flag_port"] else ""
    return guard["statement"] + port


def _guard_html(guard):
    """What a code outside its declared range gives (older reports have no guard)."""
    if not guard:
        return ""
    css = "ok" if guard["every_code_defined"] else "warn" if guard["flag"] else "bad"
    rows = [["clamp to the declared range", "yes" if guard["clamp"] else "no"],
            ["out-of-range output", guard["flag_port"] or "none"],
            ["features whose range is tighter than their port",
             ", ".join(guard["guarded_features"]) or "none"]]
    return "\n".join(["<h3>Codes outside the declared ranges</h3>",
                      f"<p class={css}>{escape(guard['statement'])}</p>",
                      _table(["", "value"], rows)])


def _cost_html(estimates):
    """One row per target estimated; a design that did not fit shows what it needs."""
    if not estimates:
        return "<p>Not estimated; run <code>thresh2hdl estimate</code> on this folder.</p>"
    rows, notes = [], []
    for target, e in estimates.items():
        name, equivalents, rule = estimate_facts(e)
        lut, carry = CELL_NAMES.get(target, ("LUT", "carry"))
        placed = e.get("placed", True)
        rows.append([target, name, "yes" if placed else "no", f"{equivalents:,}",
                     f"{e['luts']:,} {lut}", f"{e['carries']:,} {carry}",
                     f"{e['flip_flops']:,}", e["dsps"],
                     "yes" if e.get("dsp_inference") else "no",
                     f"{e['fmax_mhz']:.1f}" if placed else "-",
                     f"{e['tool_versions']['yosys']}, {e['tool_versions']['nextpnr']}"])
        notes.append(f"<p>{escape(target)}: {escape(rule)}.</p>")
        guard = e.get("input_guard")
        if guard:
            notes.append(f"<p>{escape(target)}: the input guard (clamp and/or out-of-range "
                         f"flag) costs {guard['lut4_equivalents']:+,} LUT4 equivalents and "
                         f"{guard['flip_flops']:+,} flip-flops against the same design without "
                         f"it ({guard['without_guard']['lut4_equivalents']:,} LUT4 equivalents "
                         f"by synthesis).</p>")
        if not placed:
            notes.append(f"<p class=bad>{escape(target)} {escape(name)}: not placed, the design "
                         f"does not fit; it {escape(shortfall_text(e))}. The figures are "
                         f"Yosys's synthesis of the module.</p>")
    table = _table(["target", "device", "placed", "LUT4 equivalents", "LUT cells",
                    "carry cells", "flip-flops", "DSPs", "multipliers may use DSPs",
                    "fmax (MHz)", "tools"], rows)
    return "\n".join([f"<div class=wide>{table}</div>"] + notes)


def _proof_html(proof):
    if not proof:
        return "<p>Not run; run <code>thresh2hdl prove</code> on this folder.</p>"
    css = {"proved": "ok", "counterexample": "bad"}.get(proof["status"], "warn")
    rows = [["netlist", proof["netlist"]],
            *([["netlist sha256", proof["netlist_sha256"]]] if proof.get("netlist_sha256")
              else []),
            ["statement", proof["statement"]],
            ["method", proof["method"]], ["lemmas", proof["lemmas"]],
            ["solver", f"{proof['solver']}, {proof['yosys']}"],
            ["arithmetic", f"{proof['arithmetic_bits']} bits"],
            ["timeout", f"{proof['timeout_s']} s"]]
    out = [f"<p class={css}>{escape(proof['status'])}: {escape(proof['detail'])}</p>",
           _table(["", "value"], rows)]
    example = proof.get("counterexample")
    if example:
        out.append(f"<p>Counterexample ({escape(example['file'])}), confirmed in "
                   f"{escape(example['confirmed_in'])}: {escape(example['mismatch'])}</p>")
    return "\n".join(out)


def _netlist_proofs_html(proofs):
    """Proofs of other Verilog files (``prove --netlist``) against this folder's model."""
    if not proofs:
        return ""
    rows = [[name, p["status"], p["lemmas"], (p.get("counterexample") or {}).get("file", ""),
             p["detail"]] for name, p in proofs.items()]
    return ("<h3>Other Verilog files (prove --netlist)</h3>"
            + _table(["file", "status", "lemmas", "counterexample", "detail"], rows))


def _cell(text):
    """Text for a Markdown table cell (a file name may hold a bar)."""
    return str(text).replace("|", "\\|")


def _proof_cell(proof):
    example = proof.get("counterexample")
    return (f"{proof['status']} ({proof['lemmas']} lemmas, {proof['solver']})"
            + (f"; counterexample in {example['file']}" if example else ""))


def report_markdown(report):
    """The report for review threads."""
    v = report["verification"]
    lines = [f"# {report['module']}", "", f"> **Caution.** {report['caution']}", "",
             f"thresh2hdl {report['tool_versions']['thresh2hdl']}, model sha256 "
             f"`{report['model_sha256']}`", "", "| quantity | value |", "| --- | --- |",
             f"| score range | [{report['score_range'][0]}, {report['score_range'][1]}] |",
             f"| score bits (fewest) | {report['score_bits_min']} |",
             f"| score port bits | {report['score_bits']} |",
             f"| headroom bits | {report['headroom_bits']} |",
             f"| architecture | {report['tree']['arch']} |",
             f"| latency (cycles) | {report['latency_cycles']} |",
             f"| levels | {levels_text(report['tree'])} |",
             f"| register stages | {stages_text(report)} |",
             f"| valid beats per result | {report.get('beats_per_result', 1)} |",
             *([f"| codes outside the declared ranges | {_guard_text(report['input_guard'])} |"]
               if report.get("input_guard") else []),
             *([f"| split adders | {_split_text(report)} |"] if _split_text(report) else []),
             f"| vectors checked | {report['vectors_checked']} |",
             f"| mismatches | {report['mismatches']} |",
             f"| simulator | {v['simulator_version']} |"]
    if report.get("data"):
        lines.append(f"| accuracy on {report['data']['file']} | {report['data']['accuracy']:.4f} |")
    for target, estimate in estimates_of(report).items():
        name, _, rule = estimate_facts(estimate)
        lines.append(f"| {target} {name} cost | {cost_text(estimate)} |")
        lines.append(f"| {target} LUT4 equivalents | {rule} |")
    proof = report.get("proof")
    lines.append(f"| proof | {_proof_cell(proof)} |" if proof else "| proof | not run |")
    lines += [f"| proof of --netlist {_cell(name)} | {_cell(_proof_cell(other))} |"
              for name, other in (report.get("netlist_proofs") or {}).items()]
    lines += ["", "| node | level | stage | bits | range | in the Verilog |",
              "| --- | --- | --- | --- | --- | --- |"]
    lines += [f"| {n['name']} | {n['level']} | {n.get('stage') or '-'} | {n['bits']} | "
              f"[{n['range'][0]}, {n['range'][1]}] | {n.get('verilog', '')} |"
              for n in report["tree"]["nodes"]]
    argmax = report["tree"].get("argmax")
    if argmax:
        lines += ["", "Argmax: each comparison takes the left input when left >= right (a tie "
                  "goes to the lower class index).", "",
                  "| comparison | level | stage | left | right | on a tie |",
                  "| --- | --- | --- | --- | --- | --- |"]
        lines += [f"| {c['name']} | {'-' if c['level'] is None else c['level']} | "
                  f"{c['stage'] or '-'} | {_entry(c, 'left')} | {_entry(c, 'right')} | "
                  f"{c['ties_to']} |" for c in argmax]
    return "\n".join(lines) + "\n"
