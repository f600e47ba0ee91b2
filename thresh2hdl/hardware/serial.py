"""The serial architecture: one multiply-accumulate per unit, one feature per valid beat
(:class:`SerialThreshold`); a bank decides by argmax over the held scores."""

from amaranth.hdl import Cat, Const, Module, Mux, Signal, signed

from ..names import argmax_names, unit_prefix, valid_name
from .clocking import enabled, gated
from .component import PlannedComponent
from .input_guard import guard_sample
from .trees import node_shape
from .weights import WeightStore

__all__ = ["SerialThreshold"]


class SerialThreshold(PlannedComponent):
    """One multiply-accumulate per unit and clock: features arrive one per valid beat, in the
    model's order, and the result follows the last beat by one cycle.

    Ports: ``in_valid``, ``in_ready``, ``x`` (every feature in turn, at
    :func:`~.config.sample_shape`), ``out_valid``, ``out_ready``, ``y`` (decision, or class
    index for a bank) and the scores as in :class:`~.unit.ThresholdUnit` /
    :class:`~.bank.ThresholdBank`. The beat count restarts at reset. Beats before the last
    are taken even while a result waits on ``out_ready``; the last beat waits until the
    result register is free.
    """

    kind = "serial"

    @property
    def feature_ports(self):
        return [self.x]

    def _sequence(self, m):
        """The beat counter and the handshake. Returns ``(beat, first, last, finish,
        transfer)``: the beat (None for one feature), whether it is the first or last, the
        last beat taken (the result is made) and any beat taken."""
        count = self.beats
        out_valid = Signal(name=valid_name(1))
        advance = Signal()
        transfer = Signal()
        if count > 1:
            beat = Signal(range(count), name="beat")
            first, last = Signal(name="first_beat"), Signal(name="last_beat")
            m.d.comb += [first.eq(beat == 0), last.eq(beat == count - 1)]
            with m.If(transfer):
                m.d.sync += beat.eq(Mux(last, 0, beat + 1))
        else:
            beat, first, last = None, Const(1), Const(1)
        m.d.comb += [advance.eq(self.out_ready | ~out_valid),
                     self.in_ready.eq(gated(self, advance | ~last)),
                     transfer.eq(self.in_valid & self.in_ready),
                     self.out_valid.eq(gated(self, out_valid))]
        finish = Signal(name="finish")
        m.d.comb += finish.eq(transfer & last)
        with m.If(advance):
            m.d.sync += out_valid.eq(finish)
        return beat, first, last, finish, transfer

    def _constant_mac(self, m, analysis, prefix, beat, start, total, sample):
        """``total = start + w[beat] * x`` for the trained weights."""
        node, count = analysis.node, self.beats
        # The weight's magnitude multiplies, its sign picks add or subtract: a
        # ``start + ~p + 1`` on the carry chain costs no more than ``start + p``. Measured once
        # while developing it (Yosys 0.70, iCE40, the unit of benchmarks/cost.py): 284 LUT4
        # against 310 with a signed multiplier.
        magnitudes = [abs(w) for w in analysis.weights]
        negative = [int(w < 0) for w in analysis.weights]
        magnitude = Signal(node_shape(node("magnitude")), name=prefix + "magnitude")
        subtract = Signal(name=prefix + "subtract")
        if count > 1:
            magnitude_of = Const(magnitudes[-1], magnitude.shape())
            subtract_of = Const(negative[-1], 1)
            for k in range(count - 2, -1, -1):
                magnitude_of = Mux(beat == k, magnitudes[k], magnitude_of)
                subtract_of = Mux(beat == k, negative[k], subtract_of)
        else:
            magnitude_of, subtract_of = magnitudes[0], negative[0]
        product = Signal(node_shape(node("product")), name=prefix + "product")
        extended = product if product.shape().signed else \
            Cat(product, Const(0, 1)).as_signed()
        m.d.comb += [magnitude.eq(magnitude_of), subtract.eq(subtract_of),
                     product.eq(sample * magnitude),
                     total.eq(start + Mux(subtract, ~extended, extended) + subtract)]

    def _loaded_mac(self, m, analysis, prefix, beat, start, total, sample, registers):
        """``total = start + w[beat] * x`` for the weight registers: the register of this
        beat's feature times the sample."""
        node = analysis.node
        weight = Signal(node_shape(node("weight")), name=prefix + "weight")
        choice = registers[-1]
        for k in range(self.beats - 2, -1, -1):
            choice = Mux(beat == k, registers[k], choice)
        product = Signal(node_shape(node("product")), name=prefix + "product")
        m.d.comb += [weight.eq(choice), product.eq(sample * weight), total.eq(start + product)]

    def _argmax(self, m, scores):
        """The class of the largest held score, as planned (the lower index wins ties)."""
        plan = self.bank

        def merge(level, name, left_entry, right_entry):
            (_, a, left_index), (_, b, right_index) = left_entry, right_entry
            width = max(len(a) + (not a.shape().signed), len(b) + (not b.shape().signed))
            score_name, class_name = argmax_names(name)
            best = Signal(signed(width), name=score_name)
            best_class = Signal(plan.class_bits, name=class_name)
            take_left = a >= b
            m.d.comb += [best.eq(Mux(take_left, a, b)),
                         best_class.eq(Mux(take_left, left_index, right_index))]
            return name, best, best_class

        _, _, best = plan.tournament(
            [(f"class{i}", score, Const(i, plan.class_bits))
             for i, score in enumerate(scores)], merge)
        return best

    def elaborate(self, platform):
        m = Module()
        count = self.beats
        beat, first, last, finish, transfer = self._sequence(m)
        sample = guard_sample(m, self, beat, first, last, finish, transfer)
        scores = []
        store = WeightStore(m, self, self.config) if self.config.loadable_weights else None
        for index, analysis in enumerate(self.unit_analyses):
            prefix = "" if self.bank is None else unit_prefix(index)
            node = analysis.node
            start = Signal(node_shape(node("accumulator")), name=prefix + "accumulator_in")
            total = Signal(node_shape(node("sum")), name=prefix + "sum")
            if store is not None:
                self._loaded_mac(m, analysis, prefix, beat, start, total, sample,
                                 store.weights[index])
                bias = store.biases[index]
            else:
                bias = analysis.bias
                self._constant_mac(m, analysis, prefix, beat, start, total, sample)
            if count > 1:
                held = Signal(node_shape(node("accumulator")), name=prefix + "accumulator",
                              reset_less=True)
                with m.If(transfer & ~last):   # the last beat's sum goes to the result
                    m.d.sync += held.eq(total)
                m.d.comb += start.eq(Mux(first, bias, held))
            else:
                m.d.comb += start.eq(bias)
            if analysis.has_score:
                score = Signal(signed(analysis.score_bits), name=prefix + "score_r1",
                               reset_less=True)
                with m.If(finish):
                    m.d.sync += score.eq(total)
                scores.append(score)
            if self.bank is None:
                decision = Signal(name="decision_r1", reset_less=True)
                with m.If(finish):
                    m.d.sync += decision.eq(total > 0)
                m.d.comb += self.y.eq(decision)
        for port, score in zip(self.score_ports, scores):
            m.d.comb += port.eq(score)
        if self.bank is not None:
            m.d.comb += self.y.eq(self._argmax(m, scores))
        return enabled(self, m)
