"""report.html (one self-contained file, inline SVG, no network) and report.md, from report.json.

Both are made from the same report dictionary as report.json, so the three never disagree.
"""

from html import escape

from .estimate import CELL_NAMES
from .report import cost_text, estimate_facts, estimates_of, shortfall_text

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


def _node_bars(nodes):
    """Each tree node's range against the range its width can hold (headroom visible)."""
    row, width, left = 16, 560, 170
    parts = []
    for i, node in enumerate(nodes):
        lo, hi = node["range"]
        bits = node["bits"]
        cap_lo, cap_hi = (-(1 << (bits - 1)), (1 << (bits - 1)) - 1) if node["signed"] \
            else (0, (1 << bits) - 1)
        span = cap_hi - cap_lo or 1
        x0 = left + (lo - cap_lo) / span * width
        x1 = left + (hi - cap_lo) / span * width
        y = 18 + i * row
        parts.append(f'<text x="0" y="{y + 10}">{escape(node["name"])} ({bits} bits)</text>'
                     f'<rect x="{left}" y="{y}" width="{width}" height="11" fill="#eee" '
                     f'stroke="#999"/><rect x="{x0:.1f}" y="{y}" width="{max(1.0, x1 - x0):.1f}"'
                     f' height="11" fill="#4a7ebb"/>')
    height = 24 + len(nodes) * row
    return (f'<svg xmlns="http://www.w3.org/2000/svg" width="{left + width + 10}" '
            f'height="{height}" role="img" aria-label="node ranges against widths">'
            f'<text x="{left}" y="11">grey: what the width can hold; blue: the exact range'
            f'</text>{"".join(parts)}</svg>')


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


def _histogram(data):
    histogram = data.get("histogram")
    if not histogram:
        return ""
    edges, counts = histogram["edges"], histogram["counts"]
    colours = ["#4a7ebb", "#c0504d", "#9bbb59", "#8064a2"]
    top = max(max(c) for c in counts.values()) or 1
    width, height, left = 600, 150, 20
    bar = width / (len(edges) - 1)
    parts = []
    for k, (label, values) in enumerate(counts.items()):
        for i, value in enumerate(values):
            h = value / top * height
            parts.append(f'<rect x="{left + i * bar + k * bar / len(counts):.1f}" '
                         f'y="{10 + height - h:.1f}" width="{bar / len(counts):.1f}" '
                         f'height="{h:.1f}" fill="{colours[k % len(colours)]}"/>')
        parts.append(f'<text x="{left + width + 8}" y="{20 + 14 * k}" '
                     f'fill="{colours[k % len(colours)]}">class {escape(label)}</text>')
    lo, hi = edges[0], edges[-1]
    if lo <= 0 <= hi:
        x = left + (0 - lo) / ((hi - lo) or 1) * width
        parts.append(f'<line x1="{x:.1f}" y1="5" x2="{x:.1f}" y2="{height + 12}" stroke="#a00"/>')
    parts.append(f'<text x="{left}" y="{height + 26}">score {lo:g} .. {hi:g}</text>')
    return (f'<svg xmlns="http://www.w3.org/2000/svg" width="{left + width + 90}" '
            f'height="{height + 32}" role="img" aria-label="score histogram per class">'
            f'{"".join(parts)}</svg>')


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
        ["register stages after levels", ", ".join(map(str, report["tree"]["register_after_levels"])) or "none"],
        *([["split adders", _split_text(report)]] if _split_text(report) else [])]),
        "<h3>Score range</h3>", _score_line(report),
        "<h3>Datapath values: range against width</h3>", _node_bars(report["tree"]["nodes"])]
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
                _histogram(data)]
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
    lines += ["", "| node | bits | range |", "| --- | --- | --- |"]
    lines += [f"| {n['name']} | {n['bits']} | [{n['range'][0]}, {n['range'][1]}] |"
              for n in report["tree"]["nodes"]]
    return "\n".join(lines) + "\n"
