"""The whole path for one model: analysis, circuit, Verilog, verification, report, files.

This is the library call behind ``thresh2hdl build`` and ``thresh2hdl demo``.
"""

import time
import tomllib
from dataclasses import dataclass
from importlib import resources
from pathlib import Path

import tempfile

from ..emit import instance_template, port_table
from ..errors import MismatchError
from ..hardware import UnitConfig, make_component
from ..model import Model, dataset_for_model, load_model, model_to_toml, parse_model, read_csv
from ..outdir import check_output_folder, staged_folder, write_text
from ..reports import build_report, report_html, report_json, report_markdown, summary_lines
from ..verify import (GhdlBackend, choose_simulator, first_stimulus, make_backend, make_vectors,
                      verify, write_testbench, write_vhdl_testbench)
from .languages import check_vhdl, check_vhdl_request, design_texts, prove_vhdl_reading
from .options import DEFAULT_VECTORS, BuildOptions
from .packaging import write_packaging
from .progress import progress_of
from .proving import prove_text
from .settings import SETTINGS_FILE, BuildSettings, read_history

__all__ = ["BuildResult", "build", "demo_model", "DEMO_SCENARIO"]

DEMO_SCENARIO = "pump_vibration"
EXPORTED_VECTORS = 10_000     # random vectors in the exported testbench
MODEL_COMMENT = "The model this folder was built from (canonical form)."


@dataclass(frozen=True)
class BuildResult:
    out_dir: Path
    report: dict
    verilog_path: Path

    @property
    def ok(self):
        return self.report["mismatches"] == 0

    def summary(self):
        return summary_lines(self.report)


def demo_model():
    """The embedded scenario (synthetic): a pump-vibration fault trigger on 12-bit ADC codes."""
    text = resources.files("thresh2hdl").joinpath("scenarios", f"{DEMO_SCENARIO}.toml")
    return parse_model(tomllib.loads(text.read_text(encoding="utf-8")),
                       source=f"<embedded {DEMO_SCENARIO}>")


def _inputs(model, out_dir, options):
    """The model (with ``--module``), its canonical text, its history and the data rows;
    every input checked, and the output folder refused early when it cannot be written."""
    check_output_folder(out_dir, force=options.force)   # early; again below with the inputs
    history, source = {}, None
    if not isinstance(model, Model):
        source = Path(model)
        history = read_history(source)
        model = load_model(model)
    if options.module is not None:
        model = model.with_module(options.module)
    canonical = model_to_toml(model, comment=MODEL_COMMENT)
    if source is not None and source.resolve() == (out_dir / "model.toml").resolve() and \
            source.read_text(encoding="utf-8") == canonical:
        source = None     # the folder's own model.toml, written back unchanged: nothing is lost
    check_output_folder(out_dir, force=options.force, inputs=(source, options.data))
    dataset = None
    if options.data is not None:
        dataset = dataset_for_model(read_csv(options.data, label=options.label), model)
    return model, canonical, history, dataset


def build(model, out_dir, options=BuildOptions(), *, progress=None):
    """Build, verify and report one model into ``out_dir``; returns a :class:`BuildResult`.

    ``model`` is a :class:`~thresh2hdl.model.Model` or the path of a model file. Output files
    appear all at once in ``out_dir`` (or not at all). When the design disagrees with the
    reference model the files are still written, for inspection, and :class:`MismatchError`
    is raised afterwards. ``progress``: a :class:`~thresh2hdl.app.progress.Progress`.
    """
    if not isinstance(options, BuildOptions):
        raise TypeError("options must be BuildOptions")
    progress = progress_of(progress)
    out_dir = Path(out_dir)
    model, canonical, history, dataset = _inputs(model, out_dir, options)
    timing = {}
    started = time.perf_counter()
    # Every input is checked by now or in the planning below, before the first progress line,
    # so that bad input prints its one line alone.
    component = make_component(UnitConfig(model, **options.unit_config()))
    ports = port_table(component, model)
    hdl, module = options.hdl, model.module
    check_vhdl_request(hdl, options.simulator, ports, module)
    simulator = "ghdl" if hdl == "vhdl" else choose_simulator(options.simulator)
    progress.note(f"planned: latency {component.latency} cycle(s); writing the "
                  + {"verilog": "Verilog", "vhdl": "VHDL", "both": "Verilog and VHDL"}[hdl])
    texts = design_texts(component, model, ports, hdl)
    verilog_text = texts.verilog
    verilog_name = f"{module}.v" if hdl != "vhdl" else None
    timing["verilog_s"] = time.perf_counter() - started

    count = options.vectors if options.vectors is not None else DEFAULT_VECTORS[simulator]
    progress.note(f"verifying in {simulator}: corner cases, "
                  + ("the data rows, " if dataset is not None else "") + f"{count} random vectors")
    started = time.perf_counter()
    if hdl == "vhdl":
        backend = GhdlBackend(texts.vhdl, ports, module)
    else:
        backend = make_backend(simulator, component=component, verilog_text=verilog_text,
                               ports=ports, module=module)
    data = None if dataset is None else dataset.x
    verified = verify(backend, component, model, count=count, seed=options.seed, data=data,
                      progress=progress)
    vhdl_section, vhdl_verified = None, None
    if texts.vhdl is not None:
        with tempfile.TemporaryDirectory(prefix="thresh2hdl-vhdl-") as scratch:
            vhdl_section, vhdl_verified = check_vhdl(
                texts, component, model, ports, seed=options.seed, data=data,
                count=min(count, DEFAULT_VECTORS["ghdl"]) if options.vectors is None else count,
                verified=verified if hdl == "vhdl" else None, progress=progress,
                scratch=Path(scratch))
    timing["simulation_s"] = time.perf_counter() - started
    proof, proofs = None, {}
    if options.prove:
        how = dict(timeout_s=options.prove_timeout_s, simulator="auto" if hdl == "vhdl"
                   else simulator, progress=progress)
        if verilog_name is not None:
            proof = prove_text(verilog_text, verilog_name, component, model, ports, **how)
        if texts.vhdl is not None:
            reading = prove_vhdl_reading(texts, component, model, ports, **how)
            if proof is None:
                proof = reading
            else:
                proofs[vhdl_section["file"]] = reading
        timing.update(proof.timing)
    testbench = None if hdl != "vhdl" else (vhdl_section["testbench"], vhdl_section["command"])
    record = build_report(model, component, verilog_text, verilog_name, verified,
                          seed=options.seed, chosen_guard=(options.clamp, options.range_flag),
                          dataset=dataset, history=history,
                          proof=None if proof is None else proof.section, timing=timing,
                          hdl=hdl, vhdl=vhdl_section, testbench=testbench,
                          netlist_proofs={name: p.section for name, p in proofs.items()})
    report = record.to_json()
    if vhdl_verified is not None:
        report["mismatches"] += vhdl_verified.mismatches
    progress.note(f"writing {out_dir}")
    exported = _exported(verified, component, model, options.seed)
    with staged_folder(out_dir, force=options.force) as staging:
        if verilog_name is not None:
            write_text(staging / verilog_name, verilog_text)
            write_text(staging / report["instance_template"],
                       instance_template(component, model))
        if texts.vhdl is not None:
            write_text(staging / vhdl_section["file"], texts.vhdl)
            write_text(staging / vhdl_section["package"], texts.vhdl_package)
        write_text(staging / "model.toml", canonical)
        write_text(staging / SETTINGS_FILE, BuildSettings.of(component, module).to_json())
        write_text(staging / "report.json", report_json(report))
        write_text(staging / "report.html", report_html(record))
        write_text(staging / "report.md", report_markdown(record))
        files = write_testbench(staging, ports, module, exported, verilog_name)
        if texts.vhdl is not None:
            write_vhdl_testbench(staging, ports, module, exported, vhdl_section["file"])
        write_packaging(staging, ports, module, exported, files, verilog_name, vhdl_section)
        for result in [proof, *proofs.values()]:
            if result is not None and result.counterexample_csv is not None:
                write_text(staging / result.counterexample_file, result.counterexample_csv)
    design = verilog_name or vhdl_section["file"]
    built = BuildResult(out_dir=out_dir, report=report, verilog_path=out_dir / design)
    if not built.ok:
        failed = verified if verified.mismatches else vhdl_verified
        raise MismatchError(f"{failed.mismatches} mismatch(es) against the reference model in "
                            f"{failed.simulator}; first: {failed.first_mismatches[0]}")
    for result in [proof, *proofs.values()]:
        if result is not None:
            result.raise_unless_proved()
    return built


def _exported(verified, component, model, seed):
    """The exported testbench's stimulus: the verification's first chunk, or one of
    :data:`EXPORTED_VECTORS` random vectors when that chunk is much larger."""
    exported = verified.exported
    analyses = component.unit_analyses
    if len(exported.vectors) > EXPORTED_VECTORS + 8 * len(analyses[0].weights) + 2200:
        small = make_vectors(analyses[0], random_count=EXPORTED_VECTORS, seed=seed,
                             data=None, others=analyses[1:], guard=component.config.guard)
        exported, _ = first_stimulus(component, model, small.array, seed=seed,
                                     reload_count=200)
    return exported
