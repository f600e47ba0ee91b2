"""One threshold unit as a parallel adder tree: :class:`ThresholdUnit`, and its decision,
taken from the result's parts as they arrive when the adders are split."""

from amaranth.hdl import Cat, Const, Module, Signal, signed

from ..names import GUARD_FLAG, positive_name, zero_name
from .clocking import enabled
from .component import PlannedComponent
from .input_guard import guard_inputs
from .learning import build_learning, copy_bits, entry_bias
from .plan import result_node
from .stages import Stages, handshake
from .trees import Parts, build_split_tree, build_tree
from .weights import WeightStore

__all__ = ["ThresholdUnit"]


def _beyond(value, limit, greater, lo, hi):
    """``value > limit`` (``greater``) or ``value < limit``, for a value in ``[lo, hi]``: a
    constant where the range decides it (a comparison that cannot change is a lint warning)."""
    if greater:
        decided = 1 if lo > limit else 0 if hi <= limit else None
    else:
        decided = 1 if hi < limit else 0 if lo >= limit else None
    if decided is not None:
        return Const(decided, 1)
    return value > limit if greater else value < limit


class ThresholdUnit(PlannedComponent):
    """One threshold unit, ``y = (w . x + b > 0)``, with a valid/ready handshake.

    Ports (internal names; :mod:`thresh2hdl.emit.verilog` gives them the model's names):
    ``in_valid``, ``in_ready``, ``x0`` .. ``x{N-1}`` (each at its input format),
    ``out_valid``, ``out_ready``, ``y`` and, unless omitted, ``score`` (signed).
    """

    kind = "unit"

    def elaborate(self, platform):
        m = Module()
        analysis, config = self.analysis, self.config
        advance = handshake(m, self, self.latency)
        stages = Stages(m, advance, self.register_boundaries)
        features = guard_inputs(m, stages, self.feature_ports, config)
        if config.range_flag:
            m.d.comb += self.out_of_range.eq(stages.at(GUARD_FLAG, self.latency))
        node = result_node(analysis)
        if node is None:
            # Every weight is zero: the outputs are constants, valid whenever a result is.
            m.d.comb += self.y.eq(analysis.bias > 0)
            if analysis.has_score:
                m.d.comb += self.score.eq(analysis.bias)
            return enabled(self, m)
        parts = dict(self.split_parts)
        bits, skew = config.split_bits or 0, config.carry_registers   # 0: nothing split
        if parts:
            build_split_tree(m, stages, analysis, features, parts, bits, skew)
        else:
            store = WeightStore(m, self, config, copy_bits(config)) \
                if analysis.loadable else None
            build_tree(m, stages, analysis, features, weights=store and store.weights[0],
                       bias=store and entry_bias(m, stages, config, store.biases[0]),
                       bias_less_one=bool(config.learning_lag))
        view = Parts(m, stages, analysis, parts, bits)
        decision = self._decision(m, stages, view, node)
        if config.on_chip_learning:
            build_learning(m, self, stages, store, features, [decision])
        count = self.result_parts
        m.d.comb += self.y.eq(stages.at(decision, self.latency))
        if analysis.has_score and count == 1:
            m.d.comb += self.score.eq(stages.at(node.name, self.latency))
        elif analysis.has_score:
            whole = Cat(*[view.middle(node.index, j, self.latency) for j in range(count - 1)],
                        view.top(node.index, count - 1, self.latency))
            score = Signal(signed(analysis.score_bits), name="score_split")
            m.d.comb += score.eq(whole.as_signed() if node.is_signed else whole)
            m.d.comb += self.score.eq(score)
        return enabled(self, m)

    def _decision(self, m, stages, view, node):
        """The decision from the result's parts as they arrive, each compared (or tested for
        zero) in its own stage, the parts below deciding only where it is equal; or the sign
        the bias adder made beside it (on-chip learning built for speed). Returns the name of
        the last part's decision."""
        analysis, config = self.analysis, self.config
        bits, skew = config.split_bits or 0, config.carry_registers
        final_stage = stages.stage_of(analysis.final_level)
        count = self.result_parts
        tests_score = analysis.has_score or analysis.loadable
        below = None      # the decision of the parts below, registered up to this stage
        for j in range(count):
            at = final_stage + j * skew
            is_top = j == count - 1
            part = view.top(node.index, j, at) if is_top else view.middle(node.index, j, at)
            step = Signal(name="decision" if count == 1 else f"decision_p{j}")
            positive = positive_name(node.wire_name(""))
            if count == 1 and stages.has(positive):
                m.d.comb += step.eq(stages.at(positive, at))
            elif tests_score:
                # the score is positive: nonzero and, at the top, not negative
                zero = zero_name(node.wire_name(""))
                nonzero = (~stages.at(zero, at) if count == 1 and stages.has(zero) else
                           part.any() if below is None else below | part.any())
                m.d.comb += step.eq(~part[-1] & nonzero if is_top and node.is_signed
                                    else nonzero)
            else:
                # root > threshold (or <), from the top: the highest part that differs decides
                if is_top:
                    limit = analysis.threshold >> (j * bits)
                    lo, hi = node.lo >> (j * bits), node.hi >> (j * bits)
                else:
                    limit, lo, hi = ((analysis.threshold >> (j * bits)) % (1 << bits), 0,
                                     (1 << bits) - 1)
                beyond = _beyond(part, limit, node.sign > 0, lo, hi)
                if below is not None and lo <= limit <= hi:
                    beyond = beyond | ((part == limit) & below)
                m.d.comb += step.eq(beyond)
            stages.put(step.name, step, at)
            if not is_top:
                below = stages.at(step.name, at + skew)
        return step.name
