"""One task of an exploration, as a worker runs it: make a model, or build, verify, place
and score one point, or say which tools this worker has.

Each is a top-level function of one plain argument (a dict of text, numbers and arrays)
returning a plain dict, so a process pool or a Dask worker can run it, and never raises: what
goes wrong is the result ``{"error": "..."}``, for that task alone.
"""

import json
import tempfile
import tomllib
import traceback
from dataclasses import replace
from pathlib import Path

import numpy as np

from ..cost import choose_device, estimate_cost
from ..emit import port_table
from ..errors import ThreshError
from ..model import Dataset, FeatureFormat, Unit, model_to_toml, parse_model
from ..outdir import write_files
from ..reports import store_estimate
from ..tools import find_tool, tool_version, which_tool
from ..train import (FitOptions, accuracy, digits_per_unit, fit, to_integer_weights,
                     weight_width)
from .building import build
from .fit import quantize_npz
from .folder import load_folder, report_files
from .options import BuildOptions

__all__ = ["make_model", "run_point", "worker_tools", "SIMULATOR_TOOLS"]

# The programs a simulator choice needs on the worker (Amaranth's is Python: none).
SIMULATOR_TOOLS = {"amaranth": (), "icarus": ("iverilog", "vvp"), "verilator": ("verilator",
                                                                                   "c++")}


def _guarded(task):
    """``task``'s result, or ``{"error": one line}`` whatever it raised."""
    def run(spec):
        try:
            return task(spec)
        except ThreshError as error:
            return {"error": str(error).replace("\n", " ")}
        except Exception as error:      # a bug: the line says where
            where = traceback.extract_tb(error.__traceback__)[-1]
            return {"error": f"internal error ({type(error).__name__}: {error}) at "
                             f"{Path(where.filename).name}:{where.lineno}".replace("\n", " ")}
    run.__name__ = run.__qualname__ = task.__name__
    run.__doc__ = task.__doc__
    return run


def worker_tools(spec):
    """The versions of the tools ``spec`` needs here (``families``: nextpnr's; ``simulator``),
    or the error of the first one missing."""
    try:
        versions = {"yosys": tool_version(find_tool("yosys"))}
        for family in spec["families"]:
            versions[f"nextpnr-{family}"] = tool_version(find_tool(f"nextpnr-{family}"))
        for name in SIMULATOR_TOOLS[spec["simulator"]]:
            find_tool(name)
            versions[name] = tool_version(which_tool(name)) if name != "c++" else "found"
        return {"versions": versions}
    except ThreshError as error:
        return {"error": str(error)}


def _formats(spec):
    if spec["formats"] is None:
        return None
    return [FeatureFormat(*f) for f in spec["formats"]]


def _requantized(model, spec, x, labels):
    """An integer model brought into ``weight_bits`` and/or ``digit_budget``, keeping its
    decisions on the training rows best (as quantize does a float model's)."""
    bits, budget = spec["weight_bits"], spec["digit_budget"]
    if bits is None and budget is None:
        return model
    weights = np.array([u.weights for u in model.units], dtype=np.float64)
    biases = np.array([u.bias for u in model.units], dtype=np.float64)
    lookup = {label: index for index, label in enumerate(model.labels)}
    targets = np.array([lookup[int(v)] for v in labels], dtype=np.int64)
    centre = np.array([(f.min + f.max) // 2 for f in model.features])
    result = to_integer_weights(weights, biases, bits or weight_width(
        [u.weights for u in model.units]), x, labels=targets, refine_epochs=20,
        seed=spec["seed"], centre=centre, digit_budget=budget)
    units = [Unit(u.name, tuple(int(v) for v in w), int(b))
             for u, w, b in zip(model.units, result.weights, result.biases)]
    return replace(model, units=units)


@_guarded
def make_model(spec):
    """The integer model of one training choice: ``kind`` ``fit`` (train on the rows),
    ``quantize`` (a float model's ``start`` bytes) or ``model`` (an integer model's text,
    requantized when asked); its canonical text and training accuracy."""
    x, labels = np.asarray(spec["x"]), np.asarray(spec["labels"])
    names, kind = tuple(spec["feature_names"]), spec["kind"]
    if kind == "fit":
        options = FitOptions(weight_bits=spec["weight_bits"], digit_budget=spec["digit_budget"],
                             seed=spec["seed"])
        model, _ = fit(Dataset(spec["data_name"], names, x, labels), formats=_formats(spec),
                       options=options, module=spec["module"])
    elif kind == "quantize":
        with tempfile.TemporaryDirectory(prefix="thresh2hdl-explore-") as scratch:
            folder = Path(scratch)
            (folder / "start.npz").write_bytes(spec["start"])
            rows = "".join(",".join(map(str, r)) + f",{int(y)}\n" for r, y in
                           zip(x.tolist(), labels.tolist()))
            (folder / "train.csv").write_text(",".join(names) + ",label\n" + rows)
            model = quantize_npz(folder / "start.npz", folder / "model.toml",
                                 bits=spec["weight_bits"], sweep=spec["weight_bits"] is None,
                                 data_path=folder / "train.csv", module=spec["module"],
                                 seed=spec["seed"], digit_budget=spec["digit_budget"]).model
    else:
        start = parse_model(tomllib.loads(spec["start"]), source=spec["start_name"])
        model = _requantized(start, spec, x, labels)
    return {"record": {"model": model_to_toml(model),
                       "train_accuracy": accuracy(model, x, labels),
                       "digits_total": sum(digits_per_unit([u.weights for u in model.units]))}}


def _figures(report, figures, model, held_x, held_labels):
    """The point's record: its held-out accuracy and what the circuit costs and does."""
    beats = report.get("beats_per_result") or 1
    fmax = figures["fmax_mhz"]
    cycles = report["latency_cycles"] + beats - 1      # a serial input arrives over beats
    return {
        "accuracy": accuracy(model, held_x, held_labels),
        "logic_cells": figures["logic_cells"], "lut4_equivalents": figures["lut4_equivalents"],
        "flip_flops": figures["flip_flops"], "dsps": figures["dsps"],
        "fmax_mhz": fmax, "results_per_s": round(fmax * 1e6 / beats, 1),
        "latency_cycles": cycles, "latency_ns": round(cycles * 1000.0 / fmax, 3),
        "beats_per_result": beats, "digits_total": sum(digits_per_unit(
            [u.weights for u in model.units])),
        "mismatches": report["mismatches"], "vectors_checked": report["vectors_checked"],
        "tool_versions": {**report["tool_versions"], **figures["tool_versions"]},
    }


@_guarded
def run_point(spec):
    """Build ``spec["model"]`` with the point's choices (verified in ``simulator`` on
    ``vectors`` random vectors), place it on ``device`` with ``placement_seed``, score it on
    the held-out rows; the record and the build folder's files (its report with the cost)."""
    model = parse_model(tomllib.loads(spec["model"]), source="<explored model>")
    options = BuildOptions(arch=spec["arch"], pipeline=spec["pipeline"],
                           split_bits=spec["split_bits"], vectors=spec["vectors"],
                           simulator=spec["simulator"], seed=spec["verify_seed"])
    part = choose_device(spec["device"])
    with tempfile.TemporaryDirectory(prefix="thresh2hdl-explore-") as scratch:
        out = Path(scratch) / "build"
        build(model, out, options)          # a mismatch raises: the point fails
        folder = load_folder(out)
        text = folder.verilog.read_text(encoding="utf-8")
        figures = estimate_cost(text, model.module, port_table(folder.component, model),
                                device=part.key, seed=spec["placement_seed"])
        store_estimate(folder.report, figures)
        write_files(report_files(out, folder.report), force=True)
        files = {path.name: path.read_bytes() for path in sorted(out.iterdir())}
    record = _figures(folder.report, figures, model, np.asarray(spec["held_x"]),
                      np.asarray(spec["held_labels"]))
    json.dumps(record)                       # plain data only, or the task fails here
    return {"record": record, "files": files}
