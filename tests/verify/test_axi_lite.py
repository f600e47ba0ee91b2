"""The loadable weights behind an AXI4-Lite slave (``--weight-port axi4-lite``).

Outside references: the AMBA AXI and ACE Protocol Specification (ARM IHI 0022; AXI4-Lite in
its part B), whose rules the recorded traces are held to: a source holds VALID, and its
payload, until the handshake (section "Handshake process", from memory); a write response
comes only after both the address and the data handshakes, read data only after the read
address handshake (section "Dependencies between channel handshake signals", from memory);
BVALID and RVALID low after reset; BRESP/RRESP OKAY = 0b00 and SLVERR = 0b10 (from memory);
WSTRB bit n selects byte lane n of WDATA. The simulators are independent implementations of
IEEE 1364 (Icarus Verilog 11, Verilator 5.006) and IEEE 1076-2008 (GHDL 2.0).
"""

import json

import numpy as np
import pytest

from helpers import (assert_one_line_error, bank_model, lint_icarus, lint_verilator,
                     make_model, require_tool, run)
from thresh2hdl.emit.verilog import emit_verilog, port_table
from thresh2hdl.errors import InputError
from thresh2hdl.hardware import UnitConfig, make_component, register_file
from thresh2hdl.verify.reference import ReferenceModel
from thresh2hdl.verify.register_bus import BUS_INPUTS, with_axi_lite
from thresh2hdl.verify.runner import first_stimulus, make_backend
from thresh2hdl.verify.stimulus import make_reload_stimulus, make_stimulus
from thresh2hdl.verify.vectors import random_vectors

OKAY, SLVERR = 0, 2


def _unit():
    model = make_model([3, -2, 5], bias=-4, bits=6)
    return model, make_component(UnitConfig(model=model, loadable_weights=True,
                                            weight_bits=6, bias_bits=12,
                                            weight_port="axi4-lite"))


def _serial_bank():
    model = bank_model([[1, 2], [3, -1], [0, 2]], [1, -2, 0])
    return model, make_component(UnitConfig(model=model, loadable_weights=True, arch="serial",
                                            weight_port="axi4-lite"))


def _one_load(model, component, loaded_units, seed=0):
    """A run with the trained weights, one weight set loaded through the bus, then a run
    with it: the plain stimulus, the loaded model and the bus stimulus."""
    from dataclasses import replace
    rng = np.random.default_rng(seed)
    rows = random_vectors(rng, model.feature_ranges, 200)
    first = make_stimulus(ReferenceModel.from_model(model), rows, latency=component.latency,
                          beats=component.beats, seed=seed)
    loaded = replace(model, units=loaded_units)
    plain = make_reload_stimulus(first, [(loaded, random_vectors(rng, model.feature_ranges,
                                                                  200))],
                                 latency=component.latency, beats=component.beats, seed=seed)
    return loaded, with_axi_lite(plain, *register_file(component.config), seed)


def _handshakes(inputs, outputs, valid, ready):
    return np.flatnonzero((inputs.get(valid, outputs.get(valid)) != 0)
                          & (inputs.get(ready, outputs.get(ready)) != 0))


def assert_keeps_the_handshake_rules(stimulus, outputs):
    """The AMBA rules above, on the master's inputs (ours) and a simulator's outputs."""
    inputs = {name: np.asarray(column) for name, column in stimulus.bus.inputs.items()}
    outputs = {name: np.asarray(column).astype(np.int64) for name, column in outputs.items()}
    held = {"awvalid": ("awready", ["awaddr"]), "wvalid": ("wready", ["wdata", "wstrb"]),
            "arvalid": ("arready", ["araddr"]), "bvalid": ("bready", ["bresp"]),
            "rvalid": ("rready", ["rdata", "rresp"])}
    for valid, (ready, payload) in held.items():
        v = inputs.get(valid, outputs.get(valid))
        r = inputs.get(ready, outputs.get(ready))
        waiting = np.flatnonzero((v[:-1] != 0) & (r[:-1] == 0))
        assert np.all(v[waiting + 1] != 0), f"{valid} dropped before {ready}"
        for name in payload:
            p = inputs.get(name, outputs.get(name))
            assert np.array_equal(p[waiting], p[waiting + 1]), f"{name} changed before {ready}"
    assert outputs["bvalid"][0] == 0 and outputs["rvalid"][0] == 0      # after reset
    aw = _handshakes(inputs, outputs, "awvalid", "awready")
    w = _handshakes(inputs, outputs, "wvalid", "wready")
    b_starts = np.flatnonzero(np.diff(np.concatenate([[0], outputs["bvalid"]])) > 0)
    b_done = _handshakes(inputs, outputs, "bvalid", "bready")
    # Each response: BVALID rises after its write's address and data were both taken.
    starts = [t for t in range(len(outputs["bvalid"])) if outputs["bvalid"][t] and
              (t == 0 or not outputs["bvalid"][t - 1] or t - 1 in set(b_done.tolist()))]
    assert len(starts) >= len(b_starts)
    for k, t in enumerate(starts):
        assert k < len(aw) and k < len(w) and aw[k] < t and w[k] < t
    ar = _handshakes(inputs, outputs, "arvalid", "arready")
    r_done = _handshakes(inputs, outputs, "rvalid", "rready")
    r_starts = [t for t in range(len(outputs["rvalid"])) if outputs["rvalid"][t] and
                (t == 0 or not outputs["rvalid"][t - 1] or t - 1 in set(r_done.tolist()))]
    for k, t in enumerate(r_starts):
        assert k < len(ar) and ar[k] < t
    return aw, w, ar, r_done


def _signed32(value):
    return value - (1 << 32) if value >> 31 else value


def test_read_back_returns_the_loaded_weights_and_strobes_keep_bytes():
    # The slave's answers in Amaranth's simulator, judged by this test's own reading of the
    # specification (a read of register k returns its value sign-extended; WSTRB keeps the
    # byte lanes it selects; past the last register SLVERR), not by the project's model.
    model, component = _unit()
    loaded_units = tuple(type(u)(u.name, (-32, 31, 7), -2048) for u in model.units)
    loaded, stimulus = _one_load(model, component, loaded_units)
    backend = make_backend("amaranth", component=component)
    result = backend.run(stimulus)
    assert result.check(stimulus).mismatch_count == 0
    aw, w, ar, r_done = assert_keeps_the_handshake_rules(stimulus, result.bus)
    bus, out = stimulus.bus.inputs, result.bus
    trained = list(model.unit.weights) + [model.unit.bias]
    final = list(loaded.unit.weights) + [loaded.unit.bias]
    widths = register_file(component.config)[0]
    values = list(trained)
    writes = list(zip(aw, w))
    checked_partial = 0
    # Replay the writes in order, by the cycle their response was taken; judge each read.
    events = sorted([(int(t), "b") for t in _handshakes(bus, out, "bvalid", "bready")]
                    + [(int(t), "r") for t in r_done])
    write_index = read_index = 0
    for t, kind in events:
        if kind == "b":
            a_t, w_t = writes[write_index]
            write_index += 1
            index = int(bus["awaddr"][a_t]) >> 2
            if index >= len(values):
                assert out["bresp"][t] == SLVERR
                continue
            assert out["bresp"][t] == OKAY
            word = values[index] & 0xFFFFFFFF
            for lane in range(4):
                if bus["wstrb"][w_t] >> lane & 1:
                    mask = 0xFF << (8 * lane)
                    word = (word & ~mask) | (int(bus["wdata"][w_t]) & mask)
            width = widths[index]
            low = word & ((1 << width) - 1)
            values[index] = low - (1 << width) if low >> (width - 1) else low
            checked_partial += bus["wstrb"][w_t] != 0xF
            continue
        index = int(bus["araddr"][ar[read_index]]) >> 2
        read_index += 1
        if index >= len(values):
            assert out["rresp"][t] == SLVERR and out["rdata"][t] == 0
            continue
        assert out["rresp"][t] == OKAY
        assert _signed32(int(out["rdata"][t])) == values[index], (t, index)
    assert values == final          # what was loaded is what the registers hold
    assert checked_partial >= 1 and read_index == len(r_done)
    # Every register was read back after the load, with the loaded value.
    last_write = _handshakes(bus, out, "bvalid", "bready")[-1]
    after = [int(bus["araddr"][ar[k]]) >> 2 for k in range(len(r_done))
             if r_done[k] > last_write]
    assert set(range(len(final))) <= set(after)


@pytest.mark.slow
@pytest.mark.parametrize("design", [_unit, _serial_bank], ids=["unit", "serial-bank"])
def test_every_simulator_agrees_lints_clean_and_keeps_the_handshake_rules(tmp_path, design):
    require_tool("iverilog", "vvp", "verilator", "g++", "ghdl")
    from thresh2hdl.emit.vhdl import emit_vhdl
    from thresh2hdl.verify import GhdlBackend, ghdl_lint
    model, component = design()
    rows = random_vectors(np.random.default_rng(3), model.feature_ranges, 300)
    stimulus, _ = first_stimulus(component, model, rows, reload_count=100)
    text = emit_verilog(component, model)
    (tmp_path / f"{model.module}.v").write_text(text)
    for lint in (lint_verilator(tmp_path, model.module),
                 lint_icarus(tmp_path, f"{model.module}.v")):
        assert lint == (0, ""), lint[1]
    vhdl = tmp_path / f"{model.module}.vhd"
    vhdl.write_text(emit_vhdl(component, model))
    ghdl_lint(vhdl)
    ports = port_table(component, model)
    backends = [make_backend("amaranth", component=component),
                GhdlBackend(vhdl.read_text(), ports, model.module)]
    backends += [make_backend(name, verilog_text=text, ports=ports, module=model.module)
                 for name in ("icarus", "verilator")]
    for backend in backends:
        result = backend.run(stimulus)
        assert result.check(stimulus).mismatch_count == 0, backend.name
        assert_keeps_the_handshake_rules(stimulus, result.bus)


def test_a_slave_that_zero_extends_its_reads_is_caught(monkeypatch):
    # A mutant: reads zero-extended instead of sign-extended; the trained weight -2 shows it.
    from thresh2hdl.hardware import register_bus
    original = register_bus.selected
    monkeypatch.setattr(register_bus, "selected",
                        lambda words, index: original([w.as_unsigned() for w in words], index))
    model, component = _unit()
    rows = random_vectors(np.random.default_rng(1), model.feature_ranges, 100)
    stimulus, _ = first_stimulus(component, model, rows, reload_count=50)
    checked = make_backend("amaranth", component=component).run(stimulus).check(stimulus)
    assert checked.mismatch_count > 0
    assert {m.signal for m in checked.mismatches} == {"s_axi_rdata"}


def test_the_master_drives_every_input_it_declares():
    model, component = _unit()
    rows = random_vectors(np.random.default_rng(2), model.feature_ranges, 100)
    stimulus, _ = first_stimulus(component, model, rows, reload_count=50)
    assert stimulus.writes is None and tuple(stimulus.bus.inputs) == BUS_INPUTS
    assert all(np.any(stimulus.bus.inputs[name] != 0) for name in BUS_INPUTS)
    assert len(stimulus.bus.inputs["awvalid"]) == stimulus.cycles


@pytest.mark.parametrize("options, field", [
    ({}, "weight_port"),
    ({"loadable_weights": True, "clock_enable": True}, "clock_enable"),
    ({"loadable_weights": True, "bias_bits": 40}, "bias_bits"),
    ({"loadable_weights": True, "weight_port": "wishbone"}, "weight_port"),
])
def test_refusals_name_the_field(options, field):
    model = make_model([3, -2, 5], bias=-4)
    options = {"weight_port": "axi4-lite", **options}
    with pytest.raises(InputError) as caught:
        UnitConfig(model=model, **options)
    assert caught.value.field == field


@pytest.mark.parametrize("args, contains", [
    (["--weight-port", "axi4-lite"], "--weight-port"),
    (["--weight-port", "axi4-lite", "--loadable-weights", "--clock-enable"], "clock"),
])
def test_bad_requests_fail_in_one_line(tmp_path, args, contains):
    result = run("demo", "--out", str(tmp_path / "out"), "--simulator", "amaranth",
                 "--vectors", "100", *args)
    assert_one_line_error(result, contains=contains)
    assert not (tmp_path / "out").exists()


def test_demo_folder_records_the_bus_and_checks_again(tmp_path):
    out = tmp_path / "out"
    result = run("demo", "--out", str(out), "--simulator", "amaranth", "--vectors", "200",
                 "--loadable-weights", "--weight-port", "axi4-lite")
    assert result.returncode == 0, result.stderr
    report = json.loads((out / "report.json").read_text())
    port = report["weight_port"]
    assert port["form"] == "axi4-lite" and port["data_bits"] == 32
    assert "s_axi_rdata" in port["ports"] and "s_axi_wstrb" in port["ports"]
    assert json.loads((out / "build_settings.json").read_text())["weight_port"] == "axi4-lite"
    assert "AXI4-Lite slave with read-back" in (out / "report.md").read_text()
    require_tool("iverilog", "vvp")
    again = run("check", str(out), "--simulator", "icarus", "--vectors", "200")
    assert again.returncode == 0, again.stderr


def test_the_rule_checker_catches_a_response_dropped_before_ready():
    # The checker itself can fail: BVALID dropped while BREADY is low breaks "Handshake
    # process" (AMBA AXI, from memory).
    model, component = _unit()
    rows = random_vectors(np.random.default_rng(4), model.feature_ranges, 50)
    stimulus, _ = first_stimulus(component, model, rows, reload_count=20)
    outputs = dict(make_backend("amaranth", component=component).run(stimulus).bus)
    bvalid, bready = outputs["bvalid"].copy(), stimulus.bus.inputs["bready"]
    waiting = np.flatnonzero((bvalid[:-1] == 1) & (bready[:-1] == 0))
    assert len(waiting)
    bvalid[waiting[0] + 1] = 0
    outputs["bvalid"] = bvalid
    with pytest.raises(AssertionError, match="bvalid dropped"):
        assert_keeps_the_handshake_rules(stimulus, outputs)


def test_no_slave_output_follows_an_input_within_the_cycle():
    # AMBA AXI asks for no combinational path from an input to an output of an interface
    # ("Handshake process", from memory): with every input of the slave changed and no clock
    # edge, none of its outputs moves (Amaranth's simulator, the component itself).
    from amaranth.sim import Simulator
    from thresh2hdl.hardware.register_bus import AXI_PREFIX
    from thresh2hdl.verify.register_bus import BUS_OUTPUTS
    model, component = _unit()
    inputs = [getattr(component, AXI_PREFIX + name) for name in BUS_INPUTS]
    outputs = [getattr(component, AXI_PREFIX + name) for name in BUS_OUTPUTS]
    seen = []

    async def testbench(ctx):
        for step in range(6):
            before = [ctx.get(port) for port in outputs]
            for port in inputs:
                ctx.set(port, (step * 37 + len(port)) % (1 << len(port)) or 1)
            seen.append(before == [ctx.get(port) for port in outputs])
            ctx.set(inputs[0], 0)
            await ctx.tick()

    simulator = Simulator(component)
    simulator.add_clock(1e-6)
    simulator.add_testbench(testbench)
    simulator.run()
    assert seen and all(seen)
