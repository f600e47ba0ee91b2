"""``explore``: the grid's points made, built, verified, placed and scored as independent
tasks (a local process pool or a Dask cluster), remembered by content, and the results
written as a front of accuracy against cost with the recommended point's build folder.

The folder ``out_dir`` holds ``points/`` (the cache: each finished model and point, kept
across runs), ``front.json``, ``front.csv``, ``front.html`` and ``recommended/``.
"""

import hashlib
import time
import tomllib
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from .. import __version__
from ..errors import InputError, ThreshError, ToolError
from ..explore import (DEFAULT_GRID, OBJECTIVES, Constraints, Grid, TaskCache, content_key,
                       front_csv, front_html, front_json, make_runner, pareto_front,
                       point_label, recommend)
from ..hardware import UnitConfig, plan_design
from ..cost import DEVICES
from ..model import dataset_for_model, load_model, model_to_toml, parse_model, read_csv
from ..outdir import check_output_folder, write_files
from ..train import load_float_model
from .building import demo_model
from .explore_point import SIMULATOR_TOOLS, make_model, run_point, worker_tools
from .fit import input_formats
from .progress import progress_of

__all__ = ["explore", "ExploreResult", "EXPLORE_VECTORS", "demo_rows"]

EXPLORE_VECTORS = 2000        # random vectors a point is verified on (a build: 10,000+)
CACHE_FOLDER, RECOMMENDED_FOLDER = "points", "recommended"
DEMO_ROWS = 2000


@dataclass(frozen=True)
class ExploreResult:
    out_dir: Path
    summary: dict        # front.json's data
    computed: int        # tasks run this time (models and points)
    reused: int          # tasks found finished in the cache

    @property
    def recommended(self):
        return next(r for r in self.summary["points"] if r["key"] == self.summary["recommended"])


def demo_rows(model, rows=DEMO_ROWS, seed=0):
    """Synthetic labelled rows for the demo scenario: codes uniform in each declared range,
    labelled by the model's own decision with 8% of the labels flipped (as noisy as field
    data is, so that narrower weights can cost accuracy)."""
    rng = np.random.default_rng([seed, 2026])
    x = np.stack([rng.integers(f.min, f.max, rows, endpoint=True) for f in model.features], 1)
    unit = model.units[0]
    decided = (x @ np.array(unit.weights) + unit.bias > 0).astype(np.int64)
    flip = rng.random(rows) < 0.08
    decided[flip] = 1 - decided[flip]
    return x, np.asarray(model.labels)[decided]


def _check_out(out_dir):
    """The folder: absent, empty or an earlier exploration's (resumed); nothing else."""
    check_output_folder(out_dir, force=True)
    if out_dir.is_dir() and any(out_dir.iterdir()) and not (out_dir / CACHE_FOLDER).is_dir():
        raise InputError(f"exists and is not an exploration's folder (no {CACHE_FOLDER}/); "
                         f"choose another --out", source=out_dir)


def _start(start, data, label, input_bits, signed):
    """The starting point and the labelled rows: ``(kind, start spec, names, x, labels, file,
    module)``, every input checked."""
    if start == "demo":
        model = demo_model()
        if data is None:
            x, labels = demo_rows(model)
            names, name = tuple(f.name for f in model.features), "synthetic demo rows"
        else:
            dataset = dataset_for_model(read_csv(data, label=label), model)
            x, labels, names, name = dataset.x, dataset.labels, dataset.feature_names, \
                Path(data).name
        return ("model", {"start": model_to_toml(model), "start_name": "<demo>"}, names, x,
                labels, name, model.module, None)
    if data is None:
        raise InputError("give the labelled rows (a CSV file), or --demo", field="data")
    dataset = read_csv(data, label=label)
    names, x, labels = dataset.feature_names, dataset.x, dataset.labels
    formats = input_formats(names, input_bits=input_bits, signed=signed)
    formats = None if formats is None else [(f.name, f.bits, f.signed, f.min, f.max)
                                            for f in formats]
    if start is None:
        return "fit", {}, names, x, labels, Path(data).name, "thresh_unit", formats
    path = Path(start)
    if path.suffix == ".npz":
        float_model = load_float_model(path)
        if float_model.coef.shape[1] != len(names):
            raise InputError(f"has {float_model.coef.shape[1]} inputs, the data "
                             f"{len(names)} feature columns", source=path, field="coef")
        return ("quantize", {"start": path.read_bytes()}, names, x, labels, Path(data).name,
                "thresh_unit", None)
    model = load_model(path)
    dataset_for_model(dataset, model)
    return ("model", {"start": model_to_toml(model), "start_name": str(path)}, names, x, labels,
            Path(data).name, model.module, None)


def _split(x, labels, holdout, seed):
    if not 0 < holdout < 1:
        raise InputError(f"must be a fraction between 0 and 1, not {holdout!r}", field="holdout")
    order = np.random.default_rng(seed).permutation(len(labels))
    held = max(1, int(round(holdout * len(labels))))
    if held >= len(labels):
        raise InputError(f"leaves no row to train on ({len(labels)} rows)", field="holdout")
    return order[held:], order[:held]


def _digest(*arrays):
    h = hashlib.sha256()
    for array in arrays:
        h.update(np.ascontiguousarray(array, dtype=np.int64).tobytes())
    return h.hexdigest()


def _tool_versions(runner, grid, simulator, progress):
    """The tools every worker has (the same versions everywhere), or one line naming the
    worker that lacks one."""
    families = sorted({DEVICES[d].family for d in grid.devices})
    progress.note(f"checking the tools on {runner.where}")
    answers = runner.probe(worker_tools, {"families": families, "simulator": simulator})
    versions = None
    for worker, answer in sorted(answers.items()):
        if "error" in answer:
            raise ToolError(f"worker {worker}: {answer['error']}")
        if versions is not None and answer["versions"] != versions:
            raise ToolError(f"worker {worker} has {answer['versions']}, another "
                            f"{versions}; install the same tools on every worker")
        versions = answer["versions"]
    return versions


def _run(runner, cache, function, tasks, progress, what):
    """Each task ``(key, spec, label)`` not already finished, run; finished records kept as
    they come. Returns ``({key: record}, [failed], computed, reused)``."""
    records, failed, todo = {}, [], []
    for key, spec, label in tasks:
        found = cache.record(key)
        if found is not None:
            records[key] = found
        elif key not in {k for k, _, _ in todo}:
            todo.append((key, spec, label))
    reused = len(records)
    if reused:
        progress.note(f"{reused} {what} found finished in {cache.folder}")
    done = 0
    for index, result in runner.map(function, [spec for _, spec, _ in todo]):
        key, _, label = todo[index]
        done += 1
        if "error" in result:
            cache.store_failure(key, result["error"], label)
            failed.append({"key": key, "what": label, "error": result["error"]})
            progress.note(f"{what} {done}/{len(todo)} failed: {label}: {result['error']}")
        else:
            record = result["record"]
            cache.store(key, record, result.get("files"))
            records[key] = record
            progress.note(f"{what} {done}/{len(todo)}: {label}: {_figures_text(record)}")
        progress(done, len(todo), f"exploring {what}")
    return records, failed, len(todo), reused


def _figures_text(record):
    if "logic_cells" not in record:
        return f"training accuracy {record['train_accuracy']:.4f}"
    return (f"accuracy {record['accuracy']:.4f}, {record['logic_cells']} logic cells, "
            f"{record['fmax_mhz']:.1f} MHz")


def explore(data, out_dir, grid=DEFAULT_GRID, *, start=None, constraints=Constraints(),
            scheduler=None, workers=None, vectors=EXPLORE_VECTORS, simulator="icarus",
            holdout=0.25, seed=0, label="label", input_bits=None, signed=False, progress=None):
    """Explore ``grid`` from ``start`` (None: fit on ``data``; a float ``.npz``: quantize; an
    integer model file; ``"demo"``: the embedded scenario, on synthetic rows without
    ``data``), scoring each point on a held-out share ``holdout`` of ``data``'s rows. Runs on
    the Dask scheduler at ``scheduler``, else a local pool of ``workers`` processes. Returns
    an :class:`ExploreResult`; a constraint no point meets is an InputError naming the
    nearest (the finished points stay in ``out_dir/points``)."""
    if not isinstance(grid, Grid) or not isinstance(constraints, Constraints):
        raise TypeError("grid must be a Grid and constraints Constraints")
    if simulator not in SIMULATOR_TOOLS:
        raise InputError(f"must be one of {', '.join(SIMULATOR_TOOLS)}, not {simulator!r}",
                         field="simulator")
    if isinstance(vectors, bool) or not isinstance(vectors, int) or not 0 <= vectors <= 10**7:
        raise InputError(f"must be a whole number from 0 to 10000000, not {vectors!r}",
                         field="vectors")
    if constraints.device is not None and constraints.device not in grid.devices:
        raise InputError(f"{constraints.device} is not a device of the grid "
                         f"({', '.join(grid.devices)})", field="device")
    progress = progress_of(progress)
    out_dir = Path(out_dir)
    _check_out(out_dir)
    kind, start_spec, names, x, labels, data_name, module, formats = _start(
        start, data, label, input_bits, signed)
    train, held = _split(x, labels, holdout, seed)
    started = time.perf_counter()
    with make_runner(scheduler, workers) as runner:
        versions = _tool_versions(runner, grid, simulator, progress)
        cache = TaskCache(out_dir / CACHE_FOLDER)
        start_content = start_spec.get("start", b"")      # a float model's bytes, a model's text
        start_digest = hashlib.sha256(start_content if isinstance(start_content, bytes)
                                      else start_content.encode("utf-8")).hexdigest()
        base = {"kind": kind, "x": x[train], "labels": labels[train], "feature_names": names,
                "formats": formats, "seed": seed, "module": module, "data_name": data_name,
                **start_spec}
        trainings = [(content_key({"task": "model", "thresh2hdl": __version__, "kind": kind,
                                   "start": start_digest, "rows": _digest(x[train], labels[train]),
                                   "names": names, "formats": formats, "seed": seed,
                                   "module": module, "weight_bits": bits,
                                   "digit_budget": budget}),
                      {**base, "weight_bits": bits, "digit_budget": budget},
                      _training_label(bits, budget))
                     for bits, budget in grid.trainings()]
        models, failed, computed, reused = _run(runner, cache, make_model, trainings, progress,
                                                "models")
        tasks, levers, skipped = _points(grid, trainings, models, failed, {
            "vectors": vectors, "simulator": simulator, "verify_seed": seed,
            "held_x": x[held], "held_labels": labels[held]}, versions)
        if not tasks:
            raise InputError("no point of the grid can be built: "
                             + (skipped[0]["reason"] if skipped else failed[0]["error"]),
                             field="grid")
        records, point_failures, more, again = _run(runner, cache, run_point, tasks, progress,
                                                    "points")
        where = runner.where
    failed += [{**f, **levers[f["key"]]} for f in point_failures]
    keys = list(dict.fromkeys(key for key, _, _ in tasks if key in records))
    rows = [{**levers[key], "key": key, **records[key]} for key in keys]
    summary = {
        "format": 1, "thresh2hdl": __version__, "tool_versions": versions,
        "data": {"file": data_name, "rows": len(labels), "held_out_rows": len(held),
                 "holdout": holdout, "split_seed": seed, "synthetic": data is None},
        "start": {"kind": kind, "file": "<demo>" if start == "demo" else
                  None if start is None else Path(start).name},
        "grid": grid.as_dict(), "grid_points": grid.size,
        "constraints": constraints.as_dict(),
        "verification": {"simulator": simulator, "random_vectors": vectors, "seed": seed},
        "objectives": [{"figure": k, "better": "more" if s > 0 else "less"}
                       for k, s in OBJECTIVES],
        "points": rows, "front": [r["key"] for r in pareto_front(rows)],
        "failed": failed, "skipped": skipped, "recommended_folder": RECOMMENDED_FOLDER,
    }
    summary["recommended"] = recommend(rows, constraints)["key"]
    summary["run"] = {"where": where, "seconds": round(time.perf_counter() - started, 1),
                      "computed": computed + more, "reused": reused + again}
    cache.copy_folder(summary["recommended"], out_dir / RECOMMENDED_FOLDER)
    write_files({out_dir / "front.json": front_json(summary),
                 out_dir / "front.csv": front_csv(summary),
                 out_dir / "front.html": front_html(summary)}, force=True)
    return ExploreResult(out_dir, summary, computed + more, reused + again)


def _training_label(bits, budget):
    text = f"{bits}-bit weights" if bits is not None else "the start's own weights"
    return text + (f", at most {budget} digits" if budget is not None else "")


def _points(grid, trainings, models, failed, common, versions):
    """Each point of the grid whose model was made: ``(key, spec, label)``, its levers by
    key, and the points skipped as designs the build options refuse (checked here, so that
    no worker is sent one)."""
    tasks, levers, skipped = [], {}, []
    failed_keys = {f["key"] for f in failed}
    held = _digest(common["held_x"], common["held_labels"])
    for (key, spec, _), (bits, budget) in zip(trainings, grid.trainings()):
        if key in failed_keys or key not in models:
            continue
        text = models[key]["model"]
        model = parse_model(tomllib.loads(text), source="<explored model>")
        for arch, pipeline, split, device, placement in grid.builds():
            lever = {"weight_bits": bits, "digit_budget": budget, "arch": arch,
                     "pipeline": pipeline, "split_bits": split, "device": device,
                     "placement_seed": placement}
            try:
                plan_design(UnitConfig(model, arch=arch, pipeline=pipeline, split_bits=split))
            except ThreshError as error:
                skipped.append({"what": point_label(lever), "reason": str(error)})
                continue
            point = {"model": text, "arch": arch, "pipeline": pipeline, "split_bits": split,
                     "device": device, "placement_seed": placement, **common}
            point_key = content_key({
                "task": "point", "thresh2hdl": __version__, "tools": versions,
                **{k: v for k, v in point.items() if k not in ("held_x", "held_labels")},
                "held": held})
            tasks.append((point_key, point, point_label(lever)))
            levers.setdefault(point_key, lever)
    return tasks, levers, skipped
