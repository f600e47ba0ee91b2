"""A bank of threshold units sharing the inputs, with an argmax over their scores:
:class:`ThresholdBank`."""

from amaranth.hdl import Cat, Const, Module, Mux, Signal, signed

from ..names import (GUARD_FLAG, SCORE_CONST, argmax_compare_name, argmax_names,
                     positive_name, unit_prefix)
from .clocking import enabled
from .component import PlannedComponent
from .input_guard import guard_inputs
from .learning import build_learning, entry_bias
from .stages import Stages, handshake
from .trees import Parts, build_split_tree, build_tree
from .weights import WeightStore

__all__ = ["ThresholdBank"]


class ThresholdBank(PlannedComponent):
    """Units sharing the inputs; ``y`` is the index of the largest score (ties: lowest index).

    Ports as :class:`~.unit.ThresholdUnit`, with ``y`` the class index and, unless the score
    port is omitted, ``score0`` .. ``score{U-1}`` (signed), one per unit.
    """

    kind = "bank"

    def elaborate(self, platform):
        m = Module()
        plan = self.bank
        advance = handshake(m, self, self.latency)
        stages = Stages(m, advance, self.register_boundaries)
        features = guard_inputs(m, stages, self.feature_ports, self.config)
        if self.config.range_flag:
            m.d.comb += self.out_of_range.eq(stages.at(GUARD_FLAG, self.latency))
        scores = []
        store = WeightStore(m, self, self.config) if self.config.loadable_weights else None
        parts, bits = dict(self.split_parts), self.config.split_bits
        # Split scores arrive part by part; the argmax compares whole scores, so it runs
        # this many stages behind the levels it is planned at.
        wait = (self.result_parts - 1) * self.config.carry_registers
        for index, analysis in enumerate(plan.units):
            prefix = unit_prefix(index)
            if store is not None:
                build_tree(m, stages, analysis, features, prefix, store.weights[index],
                           entry_bias(m, stages, self.config, store.biases[index]))
                scores.append(analysis.nodes[analysis.score_node].wire_name(prefix))
                continue
            if analysis.score_node is None:
                value = Signal(signed(analysis.score_bits), name=prefix + SCORE_CONST)
                m.d.comb += value.eq(analysis.bias)
                stages.put(value.name, value, 0)
                scores.append(value.name)
                continue
            if not parts:
                build_tree(m, stages, analysis, features, prefix)
                scores.append(analysis.nodes[analysis.score_node].wire_name(prefix))
                continue
            build_split_tree(m, stages, analysis, features, parts, bits,
                             self.config.carry_registers, prefix)
            scores.append(_whole_score(m, stages, Parts(m, stages, analysis, parts, bits,
                                                        prefix),
                                       analysis, stages.stage_of(plan.score_level) + wait))
        # Argmax: a tree of comparisons; the left (lower index) wins ties.
        def merge(level, name, left_entry, right_entry):
            (_, left, left_index), (_, right, right_index) = left_entry, right_entry
            compared = stages.stage_of(level) + wait
            a, b = stages.at(left, compared), stages.at(right, compared)
            left_wins = Signal(name=argmax_compare_name(name))
            m.d.comb += left_wins.eq(a >= b)
            stages.put(left_wins.name, left_wins, compared)
            stage = stages.stage_of(level + 1) + wait
            a, b = stages.at(left, stage), stages.at(right, stage)
            width = max(len(a) + (not a.shape().signed), len(b) + (not b.shape().signed))
            score_name, class_name = argmax_names(name)
            score = Signal(signed(width), name=score_name)
            index = Signal(plan.class_bits, name=class_name)
            take_left = stages.at(left_wins.name, stage)
            li = left_index if isinstance(left_index, Const) else stages.at(left_index, stage)
            ri = right_index if isinstance(right_index, Const) else stages.at(right_index, stage)
            m.d.comb += [score.eq(Mux(take_left, a, b)), index.eq(Mux(take_left, li, ri))]
            stages.put(score.name, score, stage)
            stages.put(index.name, index, stage)
            return name, score.name, index.name

        _, _, best = plan.tournament(
            [(f"class{i}", name, Const(i, plan.class_bits)) for i, name in enumerate(scores)],
            merge)
        if isinstance(best, Const):
            m.d.comb += self.y.eq(best)
        else:
            m.d.comb += self.y.eq(stages.at(best, self.latency))
        for port, name in zip(self.score_ports, scores):
            m.d.comb += port.eq(stages.at(name, self.latency))
        if self.config.on_chip_learning:
            build_learning(m, self, stages, store, features,
                           [_own_decision(m, stages, name) for name in scores])
        return enabled(self, m)


def _own_decision(m, stages, score):
    """A unit's own decision, ``score > 0``, made where its score is (one-vs-rest learning
    reads it); returns its name."""
    stage = stages.produced[score][0]
    decision = Signal(name=positive_name(score))
    m.d.comb += decision.eq(stages.at(score, stage) > 0)
    stages.put(decision.name, decision, stage)
    return decision.name


def _whole_score(m, stages, view, analysis, stage):
    """A split score joined from its parts at ``stage``, when the last has arrived; returns
    its name (the score node's own when it is whole)."""
    index = analysis.score_node
    name, count = view.name(index), view.count(index)
    if count == 1:
        return name
    node = analysis.nodes[index]
    whole = Cat(*[view.middle(index, j, stage) for j in range(count - 1)],
                view.top(index, count - 1, stage))
    score = Signal(signed(node.bits) if node.is_signed else node.bits, name=f"{name}_whole")
    m.d.comb += score.eq(whole.as_signed() if node.is_signed else whole)
    stages.put(score.name, score, stage)
    return score.name
