"""The AXI4-Lite weight port in the vectors: a bus master's cycles and the slave's expected
answers, cycle by cycle, for every simulator.

:class:`AxiLiteSlaveModel` is the cycle-exact model of :mod:`thresh2hdl.hardware.register_bus`.
:func:`with_axi_lite` turns a stimulus of the plain write port into one of the bus: each run
of plain writes (the weight sets loaded with the design idle) becomes bus transactions that
load the same values (a few byte-strobed writes of other values first, a write and a read past
the last register, then every register written whole and read back), and the first cycles of
every stretch of vectors carry reads, so reads also meet a busy datapath. The master keeps
the specification's rules (a source holds VALID and its payload until READY; from memory:
AMBA AXI, "Handshake process"), with random delays before VALID and random READY on the
response channels.
"""

from dataclasses import replace

import numpy as np

from ..hardware.register_bus import (AXI_LITE_DATA_BITS, AXI_PREFIX, RESP_OKAY, RESP_SLVERR,
                                     axi_lite_address_bits)
from .side import AXI_LITE, SideRun
from .stimulus import write_columns

__all__ = ["BUS_INPUTS", "BUS_OUTPUTS", "CHECKED_WHILE", "BusRun", "AxiLiteSlaveModel",
           "with_axi_lite", "register_value", "READ_WINDOW"]

BUS_INPUTS, BUS_OUTPUTS = AXI_LITE.inputs, AXI_LITE.outputs
CHECKED_WHILE = AXI_LITE.checked_while
READ_WINDOW = 48          # cycles at the start of each stretch of vectors that carry reads
_WORD_MASK = (1 << AXI_LITE_DATA_BITS) - 1


def BusRun(inputs, expected):
    """The bus's inputs per cycle and the outputs expected (a :class:`~.side.SideRun`)."""
    return SideRun(AXI_LITE, inputs, expected)


def _word(value):
    """A register's value as the bus reads it: sign-extended to the word (unsigned)."""
    return int(value) & _WORD_MASK


def register_value(word, width):
    """The low ``width`` bits of ``word`` as a register reads them (two's complement)."""
    word &= (1 << width) - 1
    return word - (1 << width) if word >> (width - 1) else word


class AxiLiteSlaveModel:
    """The slave's registers and state; :meth:`outputs` of the current state (every output is
    a register), :meth:`step` one clock edge."""

    def __init__(self, widths, values):
        self.widths = tuple(widths)
        self.values = [int(v) for v in values]
        self.count = len(self.values)
        self.aw = self.w = None           # held address index / (data, strobe)
        self.bvalid = self.bresp = self.rvalid = self.rdata = self.rresp = 0

    def outputs(self):
        return {"awready": int(self.aw is None and not self.bvalid),
                "wready": int(self.w is None and not self.bvalid),
                "bvalid": self.bvalid, "bresp": self.bresp,
                "arready": int(not self.rvalid), "rvalid": self.rvalid,
                "rdata": self.rdata, "rresp": self.rresp}

    def quiet(self):
        return self.aw is None and self.w is None and not self.bvalid and not self.rvalid

    def step(self, inputs):
        out = self.outputs()
        commit = self.aw is not None and self.w is not None
        aw, w = self.aw, self.w
        if out["arready"] and inputs["arvalid"]:
            index = inputs["araddr"] >> 2
            known = index < self.count
            self.rvalid, self.rresp = 1, RESP_OKAY if known else RESP_SLVERR
            self.rdata = _word(self.values[index]) if known else 0
        elif inputs["rready"]:
            self.rvalid = 0
        if commit:
            self.aw = self.w = None
            known = aw < self.count
            self.bvalid, self.bresp = 1, RESP_OKAY if known else RESP_SLVERR
            if known:
                self.values[aw] = self._merged(aw, *w)
        elif inputs["bready"]:
            self.bvalid = 0
        if out["awready"] and inputs["awvalid"]:
            self.aw = inputs["awaddr"] >> 2
        if out["wready"] and inputs["wvalid"]:
            self.w = (inputs["wdata"], inputs["wstrb"])

    def _merged(self, index, data, strobe):
        word = _word(self.values[index])
        for lane in range(AXI_LITE_DATA_BITS // 8):
            if strobe >> lane & 1:
                mask = 0xFF << (8 * lane)
                word = (word & ~mask) | (data & mask)
        return register_value(word, self.widths[index])


class _Master:
    """The bus master: a script of transactions, one at a time, in order (a write is
    ``("write", address, data, strobe)``, a read ``("read", address)``), each channel holding
    VALID and its payload until the handshake, the response channels' READY at random."""

    def __init__(self, rng, address_bits):
        self.rng, self.address_mask = rng, (1 << address_bits) - 1
        self.script = []
        self.write = self.read = None     # the transaction in progress, with its state

    def busy(self):
        return bool(self.script or self.write or self.read)

    def drive(self):
        rng = self.rng
        if self.write is None and self.read is None and self.script:
            step = self.script.pop(0)
            if step[0] == "write":
                # Random delays before AWVALID and WVALID, each channel on its own.
                self.write = {"address": step[1], "data": step[2], "strobe": step[3],
                              "aw_wait": int(rng.integers(0, 3)),
                              "w_wait": int(rng.integers(0, 3)),
                              "aw_done": False, "w_done": False}
            else:
                self.read = {"address": step[1], "wait": int(rng.integers(0, 3)),
                             "done": False}
        row = dict.fromkeys(BUS_INPUTS, 0)
        write, read = self.write, self.read
        if write is not None:
            if not write["aw_done"] and write["aw_wait"] == 0:
                row["awvalid"], row["awaddr"] = 1, write["address"] & self.address_mask
            if not write["w_done"] and write["w_wait"] == 0:
                row["wvalid"], row["wdata"], row["wstrb"] = 1, write["data"], write["strobe"]
        if read is not None and not read["done"] and read["wait"] == 0:
            row["arvalid"], row["araddr"] = 1, read["address"] & self.address_mask
        row["bready"] = int(rng.random() < 0.6)
        row["rready"] = int(rng.random() < 0.6)
        return row

    def observe(self, row, out):
        """The handshakes of this cycle, seen at its clock edge."""
        write, read = self.write, self.read
        if write is not None:
            write["aw_wait"] = max(0, write["aw_wait"] - 1)
            write["w_wait"] = max(0, write["w_wait"] - 1)
            write["aw_done"] |= bool(row["awvalid"] and out["awready"])
            write["w_done"] |= bool(row["wvalid"] and out["wready"])
            if write["aw_done"] and write["w_done"] and out["bvalid"] and row["bready"]:
                self.write = None
        if read is not None:
            read["wait"] = max(0, read["wait"] - 1)
            read["done"] |= bool(row["arvalid"] and out["arready"])
            if read["done"] and out["rvalid"] and row["rready"]:
                self.read = None


READ_BACK_MOST = 256      # registers read back after a load (a random choice beyond)


def _load_script(rng, writes, count):
    """The bus's transactions for one weight set (``writes``: (address, value) per
    register): a few byte-strobed writes of other values, each read back; a write and a read
    past the last register; every register written whole; then read back (all of them, or
    :data:`READ_BACK_MOST` at random)."""
    full_strobe = (1 << AXI_LITE_DATA_BITS // 8) - 1
    script = []
    for _ in range(min(3, len(writes))):
        address = 4 * int(rng.integers(0, count))
        script += [("write", address, int(rng.integers(0, 1 << 32)),
                    int(rng.integers(1, full_strobe))), ("read", address)]
    script += [("write", 4 * count, int(rng.integers(0, 1 << 32)), full_strobe),
               ("read", 4 * count)]
    script += [("write", 4 * int(a), _word(v), full_strobe) for a, v in writes]
    read_back = [4 * int(a) for a, _ in writes]
    if len(read_back) > READ_BACK_MOST:
        read_back = sorted(rng.choice(read_back, READ_BACK_MOST, replace=False).tolist())
    return script + [("read", address) for address in read_back]


def with_axi_lite(stimulus, widths, values, seed):
    """``stimulus`` (plain write port: its ``writes``) driven through the AXI4-Lite slave of
    registers with ``widths`` starting at ``values`` (after reset): a new stimulus whose
    ``bus`` holds the master's inputs and the slave's expected outputs."""
    rng = np.random.default_rng([11, *np.atleast_1d(seed).tolist()])
    count = len(widths)
    strobes, addresses, data = write_columns(stimulus)
    strobes = np.asarray(strobes).astype(bool)
    slave = AxiLiteSlaveModel(widths, values)
    master = _Master(rng, axi_lite_address_bits(count))
    order, inputs, expected = [], [], []
    idle_input = dict.fromkeys(BUS_INPUTS, 0)

    def cycle(source_row):
        row = master.drive()
        out = slave.outputs()
        master.observe(row, out)
        slave.step(row)
        order.append(source_row)
        inputs.append(row)
        expected.append(out)

    t, cycles = 0, stimulus.cycles
    while t < cycles:
        end = t
        if strobes[t]:
            while end < cycles and strobes[end]:
                end += 1
            loads = [(int(addresses[k]), int(data[k])) for k in range(t, end)]
            master.script = _load_script(rng, loads, count)
            while master.busy() or not slave.quiet():
                cycle(t)            # the idle row of the segment's first write, repeated
            for address, value in loads:
                if slave.values[address] != int(value):
                    raise AssertionError(f"internal: the bus loaded {slave.values[address]} "
                                         f"at register {address}, not {value}")
            t = end
            continue
        while end < cycles and not strobes[end]:
            end += 1
        window = min(end, t + READ_WINDOW)
        for k in range(t, end):
            if k < window and not master.script and rng.random() < 0.5:
                master.script.append(("read", 4 * int(rng.integers(0, count + 1))))
            if k >= window and not master.busy() and slave.quiet():
                # Nothing in flight: the rest of the stretch is one idle row repeated.
                out = slave.outputs()
                order.extend(range(k, end))
                inputs.extend([idle_input] * (end - k))
                expected.extend([out] * (end - k))
                break
            cycle(k)
        t = end
    order = np.asarray(order, dtype=np.int64)
    bus = BusRun({name: np.array([row[name] for row in inputs], dtype=np.int64)
                  for name in BUS_INPUTS},
                 {name: np.array([row[name] for row in expected], dtype=np.int64)
                  for name in BUS_OUTPUTS})
    return _expanded(stimulus, order, bus)


def _expanded(stimulus, order, bus):
    """``stimulus`` with its rows repeated as ``order`` says (each write segment's first
    row, an idle one, as many times as the bus needs) and no plain writes."""
    def spread(column):
        return np.asarray(column)[order]
    return replace(stimulus, in_valid=spread(stimulus.in_valid),
                   out_ready=spread(stimulus.out_ready), in_index=spread(stimulus.in_index),
                   expect_in_ready=spread(stimulus.expect_in_ready),
                   expect_out_valid=spread(stimulus.expect_out_valid),
                   expect_out_index=spread(stimulus.expect_out_index), writes=None, bus=bus)
