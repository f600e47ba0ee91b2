"""The report's short form, for the terminal after a build."""

from .phrases import clocking_text, stream_text, weight_port_text, learning_text, digits_text, levels_text, shared_text, stages_text
from .record import SAFETY_CAUTION, report_record

__all__ = ["summary_lines"]


def summary_lines(report):
    """The short form of the report (the record, or report.json's data)."""
    report = report_record(report)
    sizes, datapath, verification = report.sizes, report.datapath, report.verification
    lo, hi = sizes.score_range
    split = datapath.split
    lines = [
        f"module {report.module}: {len(report.features)} features -> "
        f"{' and '.join(report.design_files)}",
        f"  score range [{lo}, {hi}] needs {sizes.score_bits_min} bits; port "
        f"{sizes.score_bits} bits (headroom {sizes.headroom_bits})",
        f"  weights: nonzero signed digits {digits_text(sizes)}",
        (f"  serial multiply-accumulate: {report.beats_per_result} beats per result; "
         if datapath.arch == "serial" else
         f"  datapath: {levels_text(datapath)}, {len(datapath.nodes)} nodes; "
         f"{stages_text(report)}; ") + (f"{split.split_adders} adders split in "
                                        f"{split.split_bits}-bit parts; "
                                        if split and split.split_adders else "")
        + f"latency {report.latency_cycles} cycle(s)",
        f"  verified in {verification.simulator_version}: {verification.vectors_checked} "
        f"vectors over {verification.cycles} cycles, {verification.mismatches} mismatches",
    ]
    vhdl = report.vhdl
    if vhdl and vhdl.simulator_version:
        lines.append(f"  {vhdl.file} verified in {vhdl.simulator_version}: "
                     f"{vhdl.vectors_checked} vectors, {vhdl.mismatches} mismatches")
    if vhdl:
        lines.append(f"  {vhdl.file} lint: {vhdl.lint}")
    if datapath.shared:
        lines.append(f"  shared: {shared_text(datapath)}")
    if report.clocking:
        lines.append(f"  {clocking_text(report.clocking)}")
    if report.stream:
        lines.append(f"  interface: {stream_text(report.stream)}")
    if report.weight_port is not None:
        lines.append(f"  weight port: {weight_port_text(report.weight_port)}")
    if report.learning is not None:
        lines.append(f"  on-chip learning: {learning_text(report.learning)}")
    guard = report.input_guard
    if guard and guard.needed:
        what = " and ".join(word for word, on in (("clamped", guard.clamp),
                                                  (f"flagged on {guard.flag_port}",
                                                   guard.flag)) if on)
        lines.append(f"  codes outside the declared ranges of "
                     f"{', '.join(guard.guarded_features)}: "
                     + (f"{what}" if what else "NOT guarded (turned off): results for such "
                        "codes are not specified"))
    if report.data:
        data = report.data
        lines.append(f"  accuracy on {data.file}: {data.accuracy:.4f} over {data.rows} rows")
    proof = report.proof
    if proof:
        lines.append(f"  proof of {proof.netlist}: {proof.status} ({proof.lemmas} "
                     f"lemmas, {proof.solver})")
        if proof.status != "proved":
            lines.append(f"  PROOF {proof.detail}")
    for name, other in report.netlist_proofs.items():
        lines.append(f"  proof of {name}" + (" (GHDL's reading)" if vhdl and name == vhdl.file
                                             else "") + f": {other.status}")
    for text in verification.first_mismatches[:3]:
        lines.append(f"  MISMATCH {text}")
    lines.append(f"  caution: {SAFETY_CAUTION}")
    return lines
