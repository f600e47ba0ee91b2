"""report.html: one self-contained page (inline SVG pictures, no script, no network), read
from the report record like report.json and report.md, so the three never disagree."""

from html import escape

from ..cost import CELL_NAMES
from .drawings import (histogram_chart, polyline_chart, score_line, tree_picture,
                       unit_histogram_panels)
from .phrases import (clocking_text, stream_text, weight_port_text, learning_text, digits_text, entry_text, levels_text, shared_text,
                      split_text, stages_text)
from .record import report_record

__all__ = ["report_html", "TREE_PICTURE_MOST"]

TREE_PICTURE_MOST = 160      # values per unit drawn as a tree; larger ones: the levels table

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


def _table(headers, rows):
    head = "".join(f"<th{' class=l' if i == 0 else ''}>{escape(str(h))}</th>"
                   for i, h in enumerate(headers))
    body = "".join("<tr>" + "".join(f"<td{' class=l' if i == 0 else ''}>{escape(str(c))}</td>"
                                    for i, c in enumerate(row)) + "</tr>" for row in rows)
    return f"<table><tr>{head}</tr>{body}</table>"


def report_html(report):
    """The report (the record, or report.json's data) as one self-contained HTML page."""
    report = report_record(report)
    out = [f"<!DOCTYPE html><html lang=en><head><meta charset=utf-8>"
           f"<title>{escape(report.module)}: thresh2hdl report</title>"
           f"<style>{_STYLE}</style></head><body>",
           f"<h1>{escape(report.module)}</h1>",
           f"<p class=caution><b>Caution.</b> {escape(report.caution)}</p>",
           f"<p>Built by thresh2hdl {escape(report.tool_versions['thresh2hdl'])} from the model "
           f"with sha256 <code>{escape(report.model_sha256)}</code>.</p>",
           "<h2>Inputs and weights</h2>", _inputs_html(report),
           _guard_html(report.input_guard), *_sizes_html(report),
           *_verification_html(report), *_data_html(report.data), *_history_html(report),
           "<h2>Cost</h2>", _cost_html(report.estimates),
           "<h2>Proof</h2>", _proof_html(report.proof),
           _netlist_proofs_html(report.netlist_proofs)]
    out.append("</body></html>\n")
    return "\n".join(out)


def _inputs_html(report):
    """Each feature's format and declared range, and each unit's weight for it."""
    units = report.sizes.units
    names = [u.name for u in units] if report.sizes.is_bank else ["weight"]
    rows = []
    for j, (feature, rng) in enumerate(zip(report.features, report.sizes.feature_ranges)):
        kind = f"{'signed' if feature.signed else 'unsigned'} {feature.bits}-bit"
        rows.append([feature.name, kind, f"[{rng[0]}, {rng[1]}]"] + [u.weights[j] for u in units])
    rows.append(["bias", "", ""] + [u.bias for u in units])
    table = _table(["feature", "format", "declared range"] + names, rows)
    if len(rows) > 17:
        table = (f"<details><summary>{len(rows) - 1} features x {len(names)} unit(s): show the "
                 f"table</summary><div class=wide>{table}</div></details>")
    return f"<div class=wide>{table}</div>"


def _sizes_html(report):
    sizes, datapath = report.sizes, report.datapath
    split = split_text(datapath)
    beats = report.beats_per_result
    return ["<h2>Sizes</h2>", _table(["", "value"], [
        ["score range", f"[{sizes.score_range[0]}, {sizes.score_range[1]}]"],
        ["score bits (fewest that fit)", sizes.score_bits_min],
        ["score port bits", sizes.score_bits], ["headroom bits", sizes.headroom_bits],
        ["nonzero signed digits of the weights", digits_text(sizes)],
        ["architecture", datapath.arch], ["latency (cycles)", report.latency_cycles],
        ["valid beats per result", 1 if beats is None else beats],
        ["levels", levels_text(datapath) if datapath.level_names is not None else
         datapath.levels], ["register stages", stages_text(report)],
        *([["split adders", split]] if split else []),
        *([["shared terms", shared_text(datapath)]] if datapath.shared else []),
        *([["clocking", clocking_text(report.clocking)]] if report.clocking else []),
        *([["interface", stream_text(report.stream)]] if report.stream else []),
        *([["weight port", weight_port_text(report.weight_port)]]
          if report.weight_port else []),
        *([["on-chip learning", learning_text(report.learning)]]
          if report.learning else [])]),
        "<h3>Score range</h3>",
        score_line(sizes.score_range, report.data and report.data.score_seen, sizes.is_bank),
        "<h3>Datapath</h3>", _datapath_html(report)]


def _levels_table(datapath):
    """Each level: what it holds, how many values, their widths, its register stage."""
    stages = datapath.stages or ()
    argmax = datapath.argmax or ()
    rows = []
    for level, name in enumerate(datapath.level_names or ()):
        # (a shared term is listed under each unit that reads it: counted once)
        values = list({n.name: n for n in datapath.nodes if n.level == level}.values())
        bits = sorted({n.bits for n in values})
        count = len(values) + sum(1 for c in argmax if c.level == level)
        stage = next((s for s in stages if s.first <= level <= s.last), None)
        widths = "" if not bits else f"{bits[0]}" if len(bits) == 1 else f"{bits[0]}-{bits[-1]}"
        rows.append([level, name, count, widths,
                     "none (combinational)" if stage is None else stage.stage,
                     f"register stage {stage.stage}" if stage and stage.last == level
                     else ""])
    return _table(["level", "holds", "values", "bits", "stage", "followed by"], rows)


def _datapath_html(report):
    """The levels, each unit's tree, and a bank's argmax comparisons."""
    datapath = report.datapath
    if datapath.level_names is None:          # a report of an older version
        return _table(["node", "bits", "range"], [[n.name, n.bits, f"[{n.range[0]}, {n.range[1]}]"]
                                                 for n in datapath.nodes])
    out = [_levels_table(datapath)]
    units = [u.name for u in report.sizes.units] if report.sizes.is_bank else [None]
    for k, unit in enumerate(units):
        nodes = [n for n in datapath.nodes if n.unit == unit]
        what = "datapath" if unit is None else f"unit {unit}"
        if not nodes:
            out.append(f"<p>{escape(what)}: every weight is 0; the score is the bias.</p>")
            continue
        if len(nodes) > TREE_PICTURE_MOST:
            out.append(f"<p>{escape(what)}: {len(nodes)} values, too many to draw; each is "
                       f"in report.json and report.md.</p>")
            continue
        picture = f"<div class=wide>{tree_picture(nodes, datapath.stages or (), what)}</div>"
        if unit is not None:
            label = report.sizes.units[k].class_label
            picture = (f"<details{' open' if k == 0 else ''}><summary>{escape(what)} (class "
                       f"{escape(str(label))}): {len(nodes)} values</summary>{picture}"
                       f"</details>")
        out.append(picture)
    if datapath.shared:
        out += ["<h3>Shared terms</h3>", "<div class=wide>" + _table(
            ["term", "definition", "bits", "range", "units"],
            [[t.name, t.definition, t.bits, f"[{t.range[0]}, {t.range[1]}]", ", ".join(t.units)]
             for t in datapath.shared.terms]) + "</div>"]
    if datapath.argmax:
        out += ["<h3>Argmax</h3>", "<p>Each comparison takes its left input when left &ge; "
                "right, so a tie goes to the lower class index; the last one gives the "
                "decision.</p>",
                "<div class=wide>" + _table(["comparison", "level", "stage", "left", "right",
                                             "on a tie", "Verilog"],
                       [[c.name, "after the scores" if c.level is None else c.level,
                         "-" if c.stage is None else c.stage, entry_text(c, "left"),
                         entry_text(c, "right"), c.ties_to, c.verilog]
                        for c in datapath.argmax]) + "</div>"]
    return "\n".join(out)


def _verification_html(report):
    v = report.verification
    out = ["<h2>Verification</h2>",
           f"<p class={'ok' if v.mismatches == 0 else 'bad'}>{v.vectors_checked} vectors over "
           f"{v.cycles} cycles in {escape(v.simulator_version)}: "
           f"{v.mismatches} mismatches</p>",
           _table(["vector group", "count"], v.vector_groups)]
    if v.first_mismatches:
        out.append("<ul>" + "".join(f"<li>{escape(m)}</li>" for m in v.first_mismatches)
                   + "</ul>")
    if report.verilog:
        out.append(f"<p>Testbench for any Verilog-2001 simulator: <code>"
                   f"{escape(report.testbench.command)}</code></p>")
    vhdl = report.vhdl
    if vhdl and vhdl.simulator_version:
        out.append(f"<p class={'ok' if vhdl.mismatches == 0 else 'bad'}>{escape(vhdl.file)}: "
                   f"{vhdl.vectors_checked} vectors in {escape(vhdl.simulator_version)}: "
                   f"{vhdl.mismatches} mismatches</p>")
        out += ["<ul>" + "".join(f"<li>{escape(m)}</li>" for m in vhdl.first_mismatches)
                + "</ul>"] if vhdl.first_mismatches else []
    if vhdl:
        out += [f"<p>{escape(vhdl.file)} (VHDL-2008), lint: {escape(vhdl.lint)}. Component "
                f"package {escape(vhdl.package)}. Testbench for GHDL (any VHDL-2008 simulator "
                f"reads it): <code>{escape(vhdl.command)}</code></p>"]
    if report.packaging:
        out.append(f"<p>FuseSoC core <code>{escape(report.packaging.core_name)}</code> "
                   f"({escape(report.packaging.core_file)}, target <code>sim</code>)"
                   + (f"; cocotb test <code>python {escape(report.packaging.cocotb_test)}"
                      f"</code>" if report.packaging.cocotb_test else "") + "</p>")
    return out


def _data_html(data):
    """Accuracy on the labelled rows, the confusion table and the score histograms."""
    if not data:
        return []
    return ["<h2>Data</h2>", f"<p>Accuracy on {escape(data.file)}: "
            f"{data.accuracy:.4f} over {data.rows} rows.</p>",
            "<p>Confusion (rows: true class, columns: decided class)</p>",
            _table(["true \\ decided"] + list(data.labels),
                   [[label] + list(row) for label, row in zip(data.labels, data.confusion)]),
            histogram_chart(data.histogram), unit_histogram_panels(data.unit_histograms)]


def _history_html(report):
    """The training log's mistakes per epoch, the quantization log's sweep."""
    out = []
    training = report.training
    if training and training.mistakes_per_epoch:
        curves = training.mistakes_per_epoch[:5]
        names = [u.name for u in report.sizes.units] if report.sizes.is_bank else ["unit"]
        out += ["<h2>Training</h2>", f"<p>From {escape(training.log)}: train accuracy "
                f"{training.train_accuracy:.4f}"
                + (f", held-out {training.holdout_accuracy:.4f}"
                   if training.holdout_accuracy is not None else "") + ".</p>",
                polyline_chart(list(zip(names, curves)), label_x="epoch",
                               label_y="mistakes per epoch")]
    quantization = report.quantization
    if quantization and quantization.sweep:
        sweep = quantization.sweep
        series = [("agreement", [row.agreement for row in sweep])]
        if sweep[0].accuracy is not None:
            series.append(("accuracy", [row.accuracy for row in sweep]))
        out += ["<h2>Quantization</h2>", f"<p>From {escape(quantization.log)}: "
                f"{quantization.bits}-bit weights chosen; recommended "
                f"{quantization.recommended_bits}.</p>",
                polyline_chart(series, label_x=f"weight bits {sweep[0].bits} .. "
                               f"{sweep[-1].bits}", label_y="against the float model",
                               y_max=1.0, y_min=min(min(v) for _, v in series))]
    return out


def _guard_html(guard):
    """What a code outside its declared range gives (older reports have no guard)."""
    if not guard:
        return ""
    css = "ok" if guard.every_code_defined else "warn" if guard.flag else "bad"
    rows = [["clamp to the declared range", "yes" if guard.clamp else "no"],
            ["out-of-range output", guard.flag_port or "none"],
            ["features whose range is tighter than their port",
             ", ".join(guard.guarded_features) or "none"]]
    return "\n".join(["<h3>Codes outside the declared ranges</h3>",
                      f"<p class={css}>{escape(guard.statement)}</p>",
                      _table(["", "value"], rows)])


def _share_cell(estimate, key):
    """"412 of 5,280 (7.8%)": one resource against the device's capacity."""
    used, have, share = estimate.used().get(key, (None, None, None))
    if used is None:
        return "-" if key == "logic_cells" else ""
    return f"{used:,} of {have:,}" + (f" ({share:.1%})" if share is not None else "")


def _cost_html(estimates):
    """One row per device estimated; a design that did not fit shows what it needs."""
    if not estimates:
        return "<p>Not estimated; run <code>thresh2hdl estimate</code> on this folder.</p>"
    rows, notes = [], []
    for key, e in estimates.items():
        lut, carry = CELL_NAMES.get(e.target, ("LUT", "carry"))
        placed = e.is_placed
        rows.append([key, e.name, e.target, "yes" if placed else "no", f"{e.equivalents:,}",
                     _share_cell(e, "logic_cells"), f"{e.luts:,} {lut}",
                     f"{e.carries:,} {carry}",
                     _share_cell(e, "flip_flops") or f"{e.flip_flops:,}",
                     _share_cell(e, "dsps") or e.dsps, "yes" if e.dsp_inference else "no",
                     f"{e.fmax_mhz:.1f}" if placed else "-",
                     f"{e.tool_versions['yosys']}, {e.tool_versions['nextpnr']}"])
        notes.append(f"<p>{escape(key)}: {escape(e.rule)}"
                     + (f"; {escape(e.logic_cell_rule)}" if e.logic_cell_rule else "")
                     + ".</p>")
        guard = e.input_guard
        if guard:
            notes.append(f"<p>{escape(key)}: the input guard (clamp and/or out-of-range "
                         f"flag) costs {guard.lut4_equivalents:+,} LUT4 equivalents and "
                         f"{guard.flip_flops:+,} flip-flops against the same design without "
                         f"it ({guard.without_guard['lut4_equivalents']:,} LUT4 equivalents "
                         f"by synthesis).</p>")
        if not placed:
            notes.append(f"<p class=bad>{escape(key)} {escape(e.name)}: not placed, the "
                         f"design does not fit; it {escape(e.shortfall_text())}. The figures are "
                         f"Yosys's synthesis of the module.</p>")
    table = _table(["device", "part", "family", "placed", "LUT4 equivalents",
                    "logic cells of the part", "LUT cells", "carry cells",
                    "flip-flops of the part", "DSPs of the part",
                    "multipliers may use DSPs", "fmax (MHz)", "tools"], rows)
    return "\n".join([f"<div class=wide>{table}</div>"] + notes)


def _proof_html(proof):
    if not proof:
        return "<p>Not run; run <code>thresh2hdl prove</code> on this folder.</p>"
    css = {"proved": "ok", "counterexample": "bad"}.get(proof.status, "warn")
    rows = [["netlist", proof.netlist],
            *([["netlist sha256", proof.netlist_sha256]] if proof.netlist_sha256 else []),
            ["statement", proof.statement],
            ["method", f"{proof.method_kind or 'value-lemmas'}: {proof.method}"],
            ["lemmas", proof.lemmas],
            ["solver", f"{proof.solver}, {proof.yosys}"],
            ["arithmetic", f"{proof.arithmetic_bits} bits"],
            ["timeout", f"{proof.timeout_s} s"]]
    out = [f"<p class={css}>{escape(proof.status)}: {escape(proof.detail)}</p>",
           _table(["", "value"], rows)]
    example = proof.counterexample
    if example:
        out.append(f"<p>Counterexample ({escape(example.file)}), confirmed in "
                   f"{escape(example.confirmed_in)}: {escape(example.mismatch)}</p>")
    return "\n".join(out)


def _netlist_proofs_html(proofs):
    """Proofs of other Verilog files (``prove --netlist``) against this folder's model."""
    if not proofs:
        return ""
    rows = [[name, p.status, p.method_kind or "value-lemmas", p.lemmas,
             p.counterexample.file if p.counterexample else "", p.detail]
            for name, p in proofs.items()]
    return ("<h3>Other Verilog files (prove --netlist)</h3>"
            + _table(["file", "status", "method", "lemmas", "counterexample", "detail"], rows))
