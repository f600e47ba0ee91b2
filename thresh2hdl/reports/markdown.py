"""report.md: the report for review threads, read from the report record like report.json and
report.html."""

from .phrases import (clocking_text, stream_text, weight_port_text, learning_text, cost_text, digits_text, entry_text, guard_text,
                      levels_text, shared_text, split_text, stages_text)
from .record import report_record

__all__ = ["report_markdown"]


def _cell(text):
    """Text for a Markdown table cell (a file name may hold a bar)."""
    return str(text).replace("|", "\\|")


def _proof_cell(proof):
    example = proof.counterexample
    return (f"{proof.status} ({proof.method_kind or 'value-lemmas'}, {proof.lemmas} lemmas, "
            f"{proof.solver})"
            + (f"; counterexample in {example.file}" if example else ""))


def vhdl_rows(vhdl):
    """The VHDL file's own rows: its lint and, when it was simulated apart, its simulation."""
    rows = [f"| {vhdl.file} lint | {vhdl.lint} |"]
    if vhdl.simulator_version:
        rows += [f"| {vhdl.file} vectors checked | {vhdl.vectors_checked} in "
                 f"{vhdl.simulator_version} |", f"| {vhdl.file} mismatches | {vhdl.mismatches} |"]
    return rows + [f"| {vhdl.file} testbench | `{vhdl.command}` |"]


def report_markdown(report):
    """The report (the record, or report.json's data) for review threads."""
    report = report_record(report)
    sizes, datapath, v = report.sizes, report.datapath, report.verification
    split = split_text(datapath)
    beats = report.beats_per_result
    lines = [f"# {report.module}", "", f"> **Caution.** {report.caution}", "",
             f"thresh2hdl {report.tool_versions['thresh2hdl']}, model sha256 "
             f"`{report.model_sha256}`", "", "| quantity | value |", "| --- | --- |",
             f"| score range | [{sizes.score_range[0]}, {sizes.score_range[1]}] |",
             f"| score bits (fewest) | {sizes.score_bits_min} |",
             f"| score port bits | {sizes.score_bits} |",
             f"| headroom bits | {sizes.headroom_bits} |",
             f"| nonzero signed digits of the weights | {digits_text(sizes)} |",
             f"| architecture | {datapath.arch} |",
             f"| latency (cycles) | {report.latency_cycles} |",
             f"| levels | {levels_text(datapath)} |",
             f"| register stages | {stages_text(report)} |",
             f"| valid beats per result | {1 if beats is None else beats} |",
             *([f"| codes outside the declared ranges | {guard_text(report.input_guard)} |"]
               if report.input_guard else []),
             *([f"| clocking | {clocking_text(report.clocking)} |"] if report.clocking else []),
             *([f"| interface | {stream_text(report.stream)} |"] if report.stream else []),
             *([f"| weight port | {weight_port_text(report.weight_port)} |"]
               if report.weight_port else []),
             *([f"| on-chip learning | {learning_text(report.learning)} |"]
               if report.learning else []),
             *([f"| split adders | {split} |"] if split else []),
             *([f"| shared terms | {shared_text(datapath)} |"] if datapath.shared else []),
             f"| vectors checked | {v.vectors_checked} |",
             f"| mismatches | {v.mismatches} |",
             f"| simulator | {v.simulator_version} |"]
    if report.vhdl:
        lines += [f"| design files | {', '.join(report.design_files)} |",
                  *vhdl_rows(report.vhdl)]
    if report.data:
        lines.append(f"| accuracy on {report.data.file} | {report.data.accuracy:.4f} |")
    for key, estimate in report.estimates.items():
        lines.append(f"| {key} {estimate.name} cost | {cost_text(estimate)} |")
        lines.append(f"| {key} LUT4 equivalents | {estimate.rule} |")
        if estimate.logic_cell_rule:
            lines.append(f"| {key} logic cells | {estimate.logic_cell_rule} |")
    proof = report.proof
    lines.append(f"| proof | {_proof_cell(proof)} |" if proof else "| proof | not run |")
    lines += [f"| proof of --netlist {_cell(name)} | {_cell(_proof_cell(other))} |"
              for name, other in report.netlist_proofs.items()]
    lines += ["", "| node | level | stage | bits | range | in the Verilog |",
              "| --- | --- | --- | --- | --- | --- |"]
    lines += [f"| {n.name} | {n.level} | {n.stage or '-'} | {n.bits} | "
              f"[{n.range[0]}, {n.range[1]}] | {n.verilog or ''} |" for n in datapath.nodes]
    if datapath.shared:
        lines += ["", "| shared term | definition | bits | range | units |",
                  "| --- | --- | --- | --- | --- |"]
        lines += [f"| {t.name} | {_cell(t.definition)} | {t.bits} | [{t.range[0]}, "
                  f"{t.range[1]}] | {', '.join(t.units)} |" for t in datapath.shared.terms]
    if datapath.argmax:
        lines += ["", "Argmax: each comparison takes the left input when left >= right (a tie "
                  "goes to the lower class index).", "",
                  "| comparison | level | stage | left | right | on a tie |",
                  "| --- | --- | --- | --- | --- | --- |"]
        lines += [f"| {c.name} | {'-' if c.level is None else c.level} | "
                  f"{c.stage or '-'} | {entry_text(c, 'left')} | {entry_text(c, 'right')} | "
                  f"{c.ties_to} |" for c in datapath.argmax]
    return "\n".join(lines) + "\n"
