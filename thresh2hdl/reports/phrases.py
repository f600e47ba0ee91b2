"""The report's phrases that its forms share (terminal, HTML, Markdown): the levels, register
stages, split adders and signed digits in words, the input guard's statement, an argmax input, a cost line."""

from ..cost import CELL_NAMES
from .fields import Table
from .estimates import CostEstimate

__all__ = ["clocking_text", "stream_text", "weight_port_text", "learning_text", "count", "digits_text", "levels_text", "stages_text", "split_text", "shared_text",
           "guard_text", "entry_text", "cost_text"]


def count(number, noun):
    return f"{number} {noun}{'' if number == 1 else 's'}"


def digits_text(sizes):
    """``572 in all (per unit 57, 60, ...)``: the weights' nonzero signed digits, the adders of
    the products in ``shiftadd``."""
    per = ", ".join(str(u.signed_digits) for u in sizes.units)
    return f"{sizes.signed_digits} in all" + (f" (per unit {per})" if sizes.is_bank else "")


def levels_text(datapath):
    """``6 levels (0 products, 1-4 adders, 5 bias and decision)``."""
    runs = []
    for level, name in enumerate(datapath.level_names or ()):
        if runs and runs[-1][0] == name:
            runs[-1][2] = level
        else:
            runs.append([name, level, level])
    parts = [f"{first}{'' if first == last else f'-{last}'} {name}" for name, first, last in runs]
    return count(datapath.levels, "level") + (f" ({', '.join(parts)})" if parts else "")


def stages_text(report):
    """The register stages and the levels each follows, in the levels' count."""
    datapath = report.datapath
    stages = datapath.stages
    if stages is None:      # an older report
        recorded = report.register_stages
        return count(report.latency_cycles if recorded is None else recorded, "register stage")
    if not stages:
        return "no register stages (combinational)"
    if len(stages) == datapath.levels:
        return f"{count(len(stages), 'register stage')}, one after every level"
    spans = ", ".join(f"stage {s.stage} after level" + (
        f" {s.first}" if s.first == s.last else f"s {s.first}-{s.last}") for s in stages)
    return f"{count(len(stages), 'register stage')} ({spans})"


def split_text(datapath):
    """How the adders are split, or None. Older reports lack the counts: said without them."""
    split = datapath.split
    if split is None or not split.split_bits:
        return None
    if split.split_adders == 0:
        return f"no adder wider than {split.split_bits} bits: none split"
    adders = "adders" if split.split_adders is None else f"{split.split_adders} adders"
    carry = 1 if split.carry_registers is None else split.carry_registers
    parts = 2 if split.result_parts is None else split.result_parts
    result = ("the widest score in {} part(s), whole before the argmax"
              if datapath.argmax is not None else "the result in {} part(s)").format(parts)
    return (f"{adders} in parts of {split.split_bits} bits, {carry} register(s) on each "
            f"carry; {result}")


def shared_text(datapath):
    """A bank's shared terms in a phrase, or None."""
    shared = datapath.shared
    if shared is None:
        return None
    return (f"{count(len(shared.terms), 'term')} made once for the units that need them: "
            f"{shared.adders_with} adders ({shared.adders_without} without sharing)")


def clocking_text(clocking):
    """The reset's kind and port, and the clock enable's port and what it does."""
    timing, level = clocking.reset.split("-")
    text = (f"reset {'asynchronous' if timing == 'async' else 'synchronous'}, active {level} "
            f"({clocking.reset_port})")
    if clocking.clock_enable_port:
        text += (f"; clock enable {clocking.clock_enable_port}: while it is low every register "
                 f"holds and in_ready and out_valid read 0")
    return text


def stream_text(stream):
    """The AXI4-Stream form's lanes, port by port."""
    ports = {}
    for port, name, lo, hi in stream.lanes:
        ports.setdefault(port, []).append(f"{name} [{hi}:{lo}]")
    return "AXI4-Stream; " + "; ".join(f"{port}: {', '.join(lanes)}"
                                       for port, lanes in ports.items())


def weight_port_text(port):
    """The loadable weights' port: its form, registers and widths."""
    form = "AXI4-Lite slave with read-back" if port.form == "axi4-lite" else "write port"
    return (f"{form}, {port.addresses} registers (weights {port.weight_bits} bits, biases "
            f"{port.bias_bits} bits); {port.map}")


def learning_text(learning):
    """On-chip learning: eta, the bias step, the update path's widths, then the rule."""
    return (f"eta {learning.learning_rate}, bias step {learning.bias_step}; steps up to "
            f"{learning.step_bits} bits, saturating adders of {learning.weight_sum_bits} bits "
            f"(weights) and {learning.bias_sum_bits} (biases); {learning.rule}")


def guard_text(guard):
    """The input guard's statement, with its out-of-range output."""
    port = f" (output {guard.flag_port})" if guard.flag_port else ""
    return guard.statement + port


def entry_text(comparison, side):
    """One input of an argmax comparison and the classes it may carry."""
    classes = comparison.left_classes if side == "left" else comparison.right_classes
    return (f"{comparison.left if side == 'left' else comparison.right} "
            f"(class{'es' if len(classes) > 1 else ''} {', '.join(classes)})")


def cost_text(estimate):
    """One estimate in a line: LUT4 equivalents first, the raw cell counts beside them.
    ``estimate``: a CostEstimate, or the figures of ``thresh2hdl estimate``."""
    if not isinstance(estimate, CostEstimate):
        estimate = CostEstimate.from_json(Table(estimate, "estimate"))
    lut, carry = CELL_NAMES.get(estimate.target, ("LUT", "carry"))
    text = (f"{estimate.equivalents:,} LUT4 equivalents ({estimate.luts:,} {lut}, "
            f"{estimate.carries:,} {carry}), {estimate.flip_flops:,} flip-flops, "
            f"{estimate.dsps} DSPs (multipliers "
            f"{'may use DSPs' if estimate.dsp_inference else 'in LUTs'}), ")
    shares = estimate.capacity_text()
    if shares:
        text += f"on the {estimate.name}: {shares}; "
    text += f"fmax {estimate.fmax_mhz:.1f} MHz" if estimate.is_placed else \
        f"not placed: {estimate.shortfall_text()}"
    guard = estimate.input_guard
    if guard:
        text += (f"; of which the input guard {guard.lut4_equivalents:+,} LUT4 equivalents, "
                 f"{guard.flip_flops:+,} flip-flops (synthesis of the same design without "
                 f"it: {guard.without_guard['lut4_equivalents']:,})")
    return text
