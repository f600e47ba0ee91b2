"""The build report: one data structure, written as report.json and summarised on the terminal.

Everything in the report but its ``timing`` section is a function of the inputs alone, so two
builds of the same model give byte-identical report.json apart from that section.
"""

import json

from .estimate import (CELL_NAMES, LUT4_RULES, TARGETS, device_name, lut4_equivalents,
                       needs_text)

__all__ = ["SAFETY_CAUTION", "REPORT_FORMAT", "cost_text", "estimate_facts", "estimates_of",
           "report_json", "shortfall_text", "store_estimate", "summary_lines"]

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


def estimates_of(report):
    """Each target's cost estimate, in the order of TARGETS. Reports written before there was
    one per target have a single ``estimate``; it reads as its target's."""
    found = dict(report.get("estimates") or {})
    older = report.get("estimate")
    if older and older.get("target") not in found:
        found[older["target"]] = older
    order = {target: index for index, target in enumerate(TARGETS)}
    return {t: found[t] for t in sorted(found, key=lambda t: (order.get(t, len(order)), t))}


def store_estimate(report, figures):
    """Put ``figures`` in the report as its target's estimate, keeping the other targets'."""
    estimates = estimates_of(report)
    estimates[figures["target"]] = figures
    report.pop("estimate", None)
    report["estimates"] = estimates_of({"estimates": estimates})


def estimate_facts(figures):
    """An estimate's device name, LUT4 equivalents and rule, also for older reports'."""
    target = figures["target"]
    name = figures.get("device_name") or device_name(target, figures["device"].split())
    equivalents = figures.get("lut4_equivalents")
    if equivalents is None:
        equivalents = lut4_equivalents(target, figures["luts"], figures["carries"])
    return name, equivalents, figures.get("lut4_rule") or LUT4_RULES.get(target, "")


def shortfall_text(figures):
    """What a design that was not placed needs beyond the device, in words."""
    return needs_text(estimate_facts(figures)[0], figures.get("does_not_fit", []))


def cost_text(figures):
    """One estimate in a line: LUT4 equivalents first, the raw cell counts beside them."""
    _, equivalents, _ = estimate_facts(figures)
    lut, carry = CELL_NAMES.get(figures["target"], ("LUT", "carry"))
    text = (f"{equivalents:,} LUT4 equivalents ({figures['luts']:,} {lut}, "
            f"{figures['carries']:,} {carry}), {figures['flip_flops']:,} flip-flops, "
            f"{figures['dsps']} DSPs (multipliers "
            f"{'may use DSPs' if figures.get('dsp_inference') else 'in LUTs'}), ")
    text += f"fmax {figures['fmax_mhz']:.1f} MHz" if figures.get("placed", True) else \
        f"not placed: {shortfall_text(figures)}"
    guard = figures.get("input_guard")
    if guard:
        text += (f"; of which the input guard {guard['lut4_equivalents']:+,} LUT4 equivalents, "
                 f"{guard['flip_flops']:+,} flip-flops (synthesis of the same design without "
                 f"it: {guard['without_guard']['lut4_equivalents']:,})")
    return text


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
