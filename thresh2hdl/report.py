"""The build report: one data structure, written as report.json and summarised on the terminal.

Everything in the report but its ``timing`` section is a function of the inputs alone, so two
builds of the same model give byte-identical report.json apart from that section.
"""

import json

__all__ = ["SAFETY_CAUTION", "REPORT_FORMAT", "report_json", "summary_lines"]

REPORT_FORMAT = 1

SAFETY_CAUTION = (
    "This is not a safety-rated function. Where its decision can act on the physical world (a "
    "shutdown trigger, a safety interlock), defer to the applicable functional-safety "
    "standards, local codes and licensed practice.")


def _jsonable(value):
    if isinstance(value, dict):
        return {str(k): _jsonable(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_jsonable(v) for v in value]
    if hasattr(value, "item"):       # numpy scalars
        return value.item()
    return value


def report_json(report):
    return json.dumps(_jsonable(report), indent=2, sort_keys=False) + "\n"


def summary_lines(report):
    """The short form of the report, for the terminal."""
    lo, hi = report["score_range"]
    verification = report["verification"]
    lines = [
        f"module {report['module']}: {len(report['features'])} features -> "
        f"{report['verilog']}",
        f"  score range [{lo}, {hi}] needs {report['score_bits_min']} bits; port "
        f"{report['score_bits']} bits (headroom {report['headroom_bits']})",
        (f"  serial multiply-accumulate: {report.get('beats_per_result')} beats per result; "
         if report["tree"]["arch"] == "serial" else
         f"  adder tree: {report['tree']['levels']} levels, {len(report['tree']['nodes'])} "
         f"nodes; ") + (f"{report['tree']['split_adders']} adders split in "
                        f"{report['tree']['split_bits']}-bit parts; "
                        if report["tree"].get("split_adders") else "")
        + f"latency {report['latency_cycles']} cycle(s)",
        f"  verified in {verification['simulator_version']}: {report['vectors_checked']} vectors over "
        f"{verification['cycles']} cycles, {report['mismatches']} mismatches",
    ]
    guard = report.get("input_guard")
    if guard and guard["needed"]:
        what = " and ".join(word for word, on in (("clamped", guard["clamp"]),
                                                  (f"flagged on {guard['flag_port']}",
                                                   guard["flag"])) if on)
        lines.append(f"  codes outside the declared ranges of "
                     f"{', '.join(guard['guarded_features'])}: "
                     + (f"{what}" if what else "NOT guarded (turned off): results for such "
                        "codes are not specified"))
    if report.get("data"):
        data = report["data"]
        lines.append(f"  accuracy on {data['file']}: {data['accuracy']:.4f} over {data['rows']} rows")
    proof = report.get("proof")
    if proof:
        lines.append(f"  proof of {proof['netlist']}: {proof['status']} ({proof['lemmas']} "
                     f"lemmas, {proof['solver']})")
        if proof["status"] != "proved":
            lines.append(f"  PROOF {proof['detail']}")
    for text in verification.get("first_mismatches", [])[:3]:
        lines.append(f"  MISMATCH {text}")
    lines.append(f"  caution: {SAFETY_CAUTION}")
    return lines
