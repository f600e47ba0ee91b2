"""The adder trees of the parallel architectures, built from a unit's plan at exact widths:
whole (:func:`build_tree`), or with every adder wider than ``split_bits`` cut into parts, each
part later than the one below (:func:`build_split_tree`, :class:`Parts`)."""

from amaranth.hdl import Cat, Const, Mux, Signal, signed, unsigned

from ..analysis import row_bit
from ..names import positive_name, zero_name

__all__ = ["node_shape", "build_tree", "build_split_tree", "Parts", "constant_product",
           "combine", "sum_is_positive", "sum_is_zero"]


def node_shape(node):
    """The Amaranth shape of a planned node: its width and signedness."""
    return signed(node.bits) if node.is_signed else unsigned(node.bits)


def build_tree(m, stages, analysis, features, prefix="", weights=None, bias=None,
               bias_less_one=False):
    """Every node of one unit's plan, each in the stage of its level, put into ``stages``
    (a shared node once for the bank; a scaled node as wiring, an alias of its child).
    ``weights`` and ``bias``: the registers of loadable weights (else the plan's constants);
    ``bias`` may be the name of its value in ``stages`` (on-chip learning: the bias as the
    vector entered, carried beside it), and ``bias_less_one`` says it is carried less one:
    the score adds the one back as its carry in, and the decision is a sum of its own
    (:func:`sum_is_positive`)."""
    for node in analysis.nodes:
        name = node.wire_name(prefix)
        if node.shared and stages.has(name):
            continue           # a term shared with a unit built before: made once
        stage = stages.stage_of(node.level)
        children = [analysis.nodes[c].wire_name(prefix) for c in node.children]
        if node.kind == "scaled":
            stages.alias(name, children[0], node.magnitude.bit_length() - 1)
            continue
        if weights is not None and node.kind == "product" and analysis.dsp_products is not None:
            # Left unnamed, so that synthesis may take the register that follows into a DSP
            # block with the multiplier (a named wire is kept, and a kept wire stops it).
            stages.put(name, features[node.feature] * weights[node.feature], stage)
            continue
        value = Signal(node_shape(node), name=name)
        if weights is not None and node.kind == "product":
            expr = features[node.feature] * weights[node.feature]
        elif node.kind == "row":
            expr = Mux(weights[node.feature][row_bit(node)], features[node.feature], 0) \
                << row_bit(node)
        elif weights is not None and node.kind == "bias":
            sum_, entered = stages.at(children[0], stage), \
                (stages.at(bias, stage) if isinstance(bias, str) else bias)
            expr = sum_ + entered
            if bias_less_one:
                expr = sum_ + entered + 1
                positive = Signal(name=positive_name(name))
                m.d.comb += positive.eq(sum_is_positive(m, sum_, entered, node_shape(node),
                                                        name))
                stages.put(positive.name, positive, stage)
            elif analysis.dsp_products is not None:
                zero = Signal(name=zero_name(name))
                m.d.comb += zero.eq(sum_is_zero(m, sum_, entered, node_shape(node).width,
                                                zero.name))
                stages.put(zero.name, zero, stage)
        elif node.kind == "product":
            expr = constant_product(node, features)
        else:
            expr = combine(node, analysis, [stages.at(child, stage) for child in children])
        m.d.comb += value.eq(expr)
        stages.put(name, value, stage, node.register_shift)


class Parts:
    """Part ``j`` of a value: its bits ``[j * bits, (j + 1) * bits)``, as an operand of part
    ``j`` of a wider adder. Middle parts are unsigned ``bits`` wide; a top part is the rest of
    the value, as signed as the value (beyond its width, the value's extension)."""

    def __init__(self, m, stages, analysis, parts, bits, prefix=""):
        self.m, self.stages, self.analysis = m, stages, analysis
        self.parts, self.bits, self.prefix = parts, bits, prefix

    def name(self, index):
        """The node's name as built (a bank's unit prefix first)."""
        return self.prefix + self.analysis.nodes[index].name

    def count(self, index):
        return self.parts.get(self.name(index), 1)

    def _raw(self, index, j, stage):
        """``(value, is_top, beyond)``: part ``j`` as it is held (a split value's own part, a
        whole value's bits from ``j * bits`` up), whether it is the value's top part, and
        whether ``j`` lies beyond the value, where only its extension is left."""
        name, count = self.name(index), self.count(index)
        if count > 1:
            own = min(j, count - 1)
            return self.stages.at(f"{name}_p{own}", stage), own == count - 1, own < j
        value = self.stages.at(name, stage)
        low = j * self.bits
        if low >= len(value):
            return value, True, True
        high = value[low:]
        return (high.as_signed() if value.shape().signed else high), True, False

    @staticmethod
    def _fill(value):
        """The bit that extends ``value``: its sign, or 0."""
        return value[-1] if value.shape().signed else Const(0, 1)

    def middle(self, index, j, stage):
        """Part ``j`` as ``bits`` unsigned bits, for the part ``j`` of a wider adder."""
        value, is_top, beyond = self._raw(index, j, stage)
        if beyond:
            return Cat(*([self._fill(value)] * self.bits))
        if not is_top or len(value) >= self.bits:
            return value[:self.bits]
        return Cat(value, *([self._fill(value)] * (self.bits - len(value))))

    def top(self, index, j, stage):
        """The value from bit ``j * bits`` up, for the top part of an adder (exact as a signed
        number where the value is held whole; a middle part is exact modulo its width, which
        is all a narrower top part needs)."""
        value, _, beyond = self._raw(index, j, stage)
        if beyond:
            return self._fill(value).as_signed() if value.shape().signed else Const(0, 1)
        return value

    def complement(self, index, j, stage, top):
        """``~`` part ``j`` of a subtrahend, made where the part is made: its registers carry
        the complement, so no inverter LUT sits before the subtractor's carry chain."""
        own = self.name(index)
        name = f"{own}_{'t' if top else 'p'}{j}_not"
        if name not in self.stages.produced:
            count = self.count(index)
            source = f"{own}_p{min(j, count - 1)}" if count > 1 else own
            made = self.stages.produced[source][0]
            if top:
                part = self.top(index, j, made)
                part = part if part.shape().signed else Cat(part, Const(0, 1)).as_signed()
                value = Signal(signed(len(part)), name=name)
            else:
                part = self.middle(index, j, made)
                value = Signal(self.bits, name=name)
            self.m.d.comb += value.eq(~part)
            self.stages.put(name, value, made)
        return self.stages.at(name, stage)


def build_split_tree(m, stages, analysis, features, parts, split_bits, skew, prefix=""):
    """As :func:`build_tree`, but an adder wider than ``split_bits`` is a row of adders,
    one per ``split_bits``-wide part: part ``j`` adds the operands' parts ``j`` and the carry
    of part ``j - 1``, ``skew`` register stages after it (the carry crosses ``skew``
    registers, so that the placer can keep each piece of its route short). Part ``j`` of the
    whole tree runs ``j * skew`` stages behind part 0, so no carry chain is longer than
    ``split_bits``.
    ``parts``: the part counts (:func:`~thresh2hdl.hardware.plan.adder_parts`), by name as
    built (``prefix``, a bank's unit prefix, then the node's name)."""
    view = Parts(m, stages, analysis, parts, split_bits, prefix)
    for node in analysis.nodes:
        stage = stages.stage_of(node.level)
        if node.kind == "product":
            value = Signal(node_shape(node), name=prefix + node.name)
            m.d.comb += value.eq(constant_product(node, features))
            stages.put(prefix + node.name, value, stage, node.register_shift)
            continue
        count = parts.get(prefix + node.name, 1)
        if count == 1:
            operands = [view.top(c, 0, stage) for c in node.children]
            value = Signal(node_shape(node), name=prefix + node.name)
            m.d.comb += value.eq(combine(node, analysis, operands))
            stages.put(prefix + node.name, value, stage)
            continue
        constant = None
        if node.kind in ("offset", "bias"):
            constant = node.constant
            child = analysis.nodes[node.children[0]]
            kind = "rsub" if node.kind == "bias" and child.sign < 0 else "add"
        else:
            kind = node.kind
        # a - b = a + ~b + 1: the carry into part 0 is 1, and a carry out of a part is 1
        # when nothing is borrowed. (sub: left minus right; rsub: right minus left, the
        # right possibly the bias constant.)
        minuend, subtrahend = (0, 1) if kind in ("add", "sub") else (1, 0)
        carry = Const(int(kind != "add"), 1)

        def operand(position, j, at, is_top):
            child = node.children[position]
            if kind != "add" and position == subtrahend:
                return view.complement(child, j, at, is_top)
            return view.top(child, j, at) if is_top else view.middle(child, j, at)

        for j in range(count):
            at = stage + j * skew
            is_top = j == count - 1
            shift = j * split_bits
            left = operand(0, j, at, is_top)
            if constant is None:
                right = operand(1, j, at, is_top)
            elif is_top:
                right = Const(constant >> shift)
            else:
                right = Const((constant >> shift) % (1 << split_bits), split_bits)
            operands = [left, right]
            total = operands[minuend] + operands[subtrahend] + carry
            if is_top:
                width = node.bits - shift
                part = Signal(signed(width) if node.is_signed else unsigned(width),
                              name=f"{prefix}{node.name}_p{j}")
                m.d.comb += part.eq(total)
                stages.put(part.name, part, at)
                continue
            wide = Signal(split_bits + 1, name=f"{prefix}{node.name}_p{j}_sum")
            part = Signal(split_bits, name=f"{prefix}{node.name}_p{j}")
            carried = Signal(name=f"{prefix}{node.name}_c{j}")
            m.d.comb += [wide.eq(total), part.eq(wide[:split_bits]),
                         carried.eq(wide[split_bits])]
            stages.put(part.name, part, at)
            stages.put(carried.name, carried, at)
            carry = stages.at(carried.name, at + skew)


def sum_is_positive(m, a, less, shape, name):
    """Whether ``a + less + 1 > 0`` (``shape``: the sum's), that is whether ``a + less`` is
    not negative: the sign of a sum of its own, a bit wider (exact for any operands), on a
    carry chain beside the score's with nothing between the registers and it."""
    total = Signal(signed(shape.width + 1), name=f"{name}_less1")
    m.d.comb += total.eq(a + less)
    return ~total[-1]


def sum_is_zero(m, a, b, width, name):
    """Whether ``a + b`` is 0 in ``width``-bit two's complement (wide enough for the sum),
    without its carries: ``a ^ b == (a | b) << 1`` bit by bit (a sum is zero exactly where
    each bit of ``a ^ b`` is the carry the bits below make, and each of them carries,
    common practice), so each bit is one LUT of four operand bits and the test runs beside
    the adder rather than after it."""
    def bit(value, i):
        if i < len(value):
            return value[i]
        return value[-1] if value.shape().signed else Const(0, 1)
    terms = [bit(a, 0) ^ bit(b, 0)]
    terms += [bit(a, i) ^ bit(b, i) ^ (bit(a, i - 1) | bit(b, i - 1)) for i in range(1, width)]
    # Four terms a wire (two LUT levels each; kept, so that synthesis keeps the test
    # shallow), then one test of the wires.
    groups = []
    for start in range(0, width, 4):
        group = Signal(name=f"{name}_g{len(groups)}")
        m.d.comb += group.eq(Cat(*terms[start:start + 4]).any())
        groups.append(group)
    return ~Cat(*groups).any()


def constant_product(node, features):
    """``x * |w|``: a shift when ``|w|`` is a power of two (every shift-add leaf)."""
    x, magnitude = features[node.feature], node.magnitude
    if magnitude & (magnitude - 1) == 0:
        return x << (magnitude.bit_length() - 1)
    return x * Const(magnitude)


def combine(node, analysis, operands):
    """An adder node's value from its operands (``offset``: the bias folded into a sum)."""
    if node.kind == "add":
        return operands[0] + operands[1]
    if node.kind == "sub":
        return operands[0] - operands[1]
    if node.kind == "rsub":
        return operands[1] - operands[0]
    if node.kind == "offset":
        return operands[0] + Const(node.constant)
    child = analysis.nodes[node.children[0]]
    bias = Const(node.constant)
    return operands[0] + bias if child.sign > 0 else bias - operands[0]
