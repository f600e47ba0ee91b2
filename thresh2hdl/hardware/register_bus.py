"""The loadable weights behind an AXI4-Lite slave (per the AMBA AXI4-Lite specification):
32-bit data, one register a word, with read-back.

Register ``k`` (the plain write port's address ``k``: unit ``u``'s weight ``i`` at
``u * (features + 1) + i``, its bias after them) is the word at byte address ``4 * k``; the
two low address bits are ignored. A register is read sign-extended to 32 bits; a write
keeps the bytes whose WSTRB bit is set and the register's own bytes elsewhere, then the
register's low bits. An address past the last register answers SLVERR, writes nothing and
reads 0.

Every output is a register (the specification asks for no combinational path from an input
to an output of an interface, from memory: AMBA AXI, "Handshake process"): AWREADY and WREADY
are high while the slave holds no address (or no data) of its own and no response waits;
the write happens in the cycle after both are held, with BVALID from the next; ARREADY is
high while no read data waits, and the read data is the register's value in the cycle of
the address handshake. :class:`thresh2hdl.verify.register_bus.AxiLiteSlaveModel` is the
cycle-exact model of this.
"""

from amaranth.hdl import Cat, Const, Mux, Signal
from amaranth.lib.wiring import In, Out

__all__ = ["WEIGHT_PORTS", "AXI_LITE_DATA_BITS", "AXI_PREFIX", "RESP_OKAY", "RESP_SLVERR",
           "axi_lite_address_bits", "axi_lite_members", "build_axi_lite", "selected",
           "index_known"]

WEIGHT_PORTS = ("plain", "axi4-lite")
AXI_LITE_DATA_BITS = 32
AXI_PREFIX = "s_axi_"
# The response codes (AMBA AXI: RRESP/BRESP encodings, from memory).
RESP_OKAY, RESP_SLVERR = 0, 2


def axi_lite_address_bits(registers):
    """AWADDR/ARADDR width: every register's byte address (two more bits than the word
    index)."""
    return max(1, (registers - 1).bit_length()) + 2


def axi_lite_members(registers):
    """The slave's signature members, named as the specification names its signals."""
    address = axi_lite_address_bits(registers)
    data = AXI_LITE_DATA_BITS
    members = {"awvalid": In(1), "awready": Out(1), "awaddr": In(address),
               "wvalid": In(1), "wready": Out(1), "wdata": In(data), "wstrb": In(data // 8),
               "bvalid": Out(1), "bready": In(1), "bresp": Out(2),
               "arvalid": In(1), "arready": Out(1), "araddr": In(address),
               "rvalid": Out(1), "rready": In(1), "rdata": Out(data), "rresp": Out(2)}
    return {AXI_PREFIX + name: member for name, member in members.items()}


def _port(component, name):
    return getattr(component, AXI_PREFIX + name)


def build_axi_lite(m, component, registers):
    """The slave in front of ``registers`` (signed Signals in address order)."""
    count = len(registers)
    index_bits = axi_lite_address_bits(count) - 2
    data_bits = AXI_LITE_DATA_BITS
    aw_held, w_held = Signal(name="axi_aw_held"), Signal(name="axi_w_held")
    aw_index = Signal(index_bits, name="axi_aw_index")
    w_data = Signal(data_bits, name="axi_w_data")
    w_strobe = Signal(data_bits // 8, name="axi_w_strobe")
    bvalid, bresp = Signal(name="axi_bvalid"), Signal(2, name="axi_bresp")
    rvalid, rresp = Signal(name="axi_rvalid"), Signal(2, name="axi_rresp")
    rdata = Signal(data_bits, name="axi_rdata")
    awvalid, wvalid = _port(component, "awvalid"), _port(component, "wvalid")
    arvalid = _port(component, "arvalid")
    awready, wready = Signal(name="axi_awready"), Signal(name="axi_wready")
    arready = Signal(name="axi_arready")
    m.d.comb += [awready.eq(~aw_held & ~bvalid), wready.eq(~w_held & ~bvalid),
                 arready.eq(~rvalid),
                 _port(component, "awready").eq(awready), _port(component, "wready").eq(wready),
                 _port(component, "arready").eq(arready),
                 _port(component, "bvalid").eq(bvalid), _port(component, "bresp").eq(bresp),
                 _port(component, "rvalid").eq(rvalid), _port(component, "rdata").eq(rdata),
                 _port(component, "rresp").eq(rresp)]
    with m.If(awvalid & awready):
        m.d.sync += [aw_held.eq(1), aw_index.eq(_port(component, "awaddr")[2:])]
    with m.If(wvalid & wready):
        m.d.sync += [w_held.eq(1), w_data.eq(_port(component, "wdata")),
                     w_strobe.eq(_port(component, "wstrb"))]
    commit = Signal(name="axi_commit")
    m.d.comb += commit.eq(aw_held & w_held)
    with m.If(commit):
        m.d.sync += [aw_held.eq(0), w_held.eq(0), bvalid.eq(1),
                     bresp.eq(Mux(index_known(aw_index, count), RESP_OKAY, RESP_SLVERR))]
    with m.Elif(_port(component, "bready")):
        m.d.sync += bvalid.eq(0)
    for address, register in enumerate(registers):
        with m.If(commit & (aw_index == address)):
            m.d.sync += register.eq(_merged(register, w_data, w_strobe))
    words = [register.as_signed() for register in registers]
    read_index = _port(component, "araddr")[2:]
    with m.If(arvalid & arready):
        known = index_known(read_index, count)
        word = selected(words, read_index)
        m.d.sync += [rvalid.eq(1), rdata.eq(Mux(known, word, 0)),
                     rresp.eq(Mux(known, RESP_OKAY, RESP_SLVERR))]
    with m.Elif(_port(component, "rready")):
        m.d.sync += rvalid.eq(0)


def selected(words, index):
    """``words[index]`` as a tree of two-way multiplexers, one level per index bit (the
    netlist's writers print two-way multiplexers; an index past the end reads the last)."""
    level = 0
    while len(words) > 1:
        words = [Mux(index[level], words[k + 1], words[k]) if k + 1 < len(words) else words[k]
                 for k in range(0, len(words), 2)]
        level += 1
    return words[0]


def index_known(index, count):
    """Whether a word index names a register (no comparison when every index does: a
    comparison that cannot change is a lint warning)."""
    return index < count if count < 1 << len(index) else Const(1)


def _merged(register, data, strobe):
    """The register's new value: each byte that ``strobe`` selects from ``data``, the others
    from the register's own value sign-extended to the bus (only the bytes that reach the
    register are built)."""
    width = len(register)
    old = register.as_signed()
    parts = []
    for lane in range(-(-width // 8)):
        top = min(8 * lane + 8, width)
        parts.append(Mux(strobe[lane], data[8 * lane: top], old[8 * lane: top]))
    return Cat(*parts) if len(parts) > 1 else parts[0]
