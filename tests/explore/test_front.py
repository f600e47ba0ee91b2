"""The exploration's parts that need no tool: the grid's checks, the front against a
brute-force dominance check, the recommendation, the cache and the files of the results."""

import csv
import io
import json
import random

import pytest

from helpers import Structure
from thresh2hdl.errors import InputError
from thresh2hdl.explore import (CSV_COLUMNS, Constraints, Grid, TaskCache, content_key,
                                front_csv, front_html, front_json, pareto_front, recommend)


def random_rows(count, seed):
    rng = random.Random(seed)
    rows = []
    for index in range(count):
        fmax = rng.choice([20.0, 35.5, 50.0, 80.25])
        cycles = rng.randint(1, 4)
        rows.append({"key": f"k{index:03d}", "weight_bits": rng.choice([4, 6, None]),
                     "digit_budget": None, "arch": rng.choice(["tree", "shiftadd"]),
                     "pipeline": cycles, "split_bits": rng.choice([None, 8]),
                     "device": rng.choice(["up5k", "hx8k"]), "placement_seed": 1,
                     "accuracy": rng.choice([0.8, 0.85, 0.9, 0.95]),
                     "logic_cells": rng.choice([100, 150, 200, 400]),
                     "lut4_equivalents": 90, "flip_flops": 30, "fmax_mhz": fmax,
                     "results_per_s": fmax * 1e6, "latency_cycles": cycles,
                     "latency_ns": cycles * 1000 / fmax, "digits_total": 12})
    return rows


def brute_force_front(rows):
    # An independent check, written apart from thresh2hdl.explore.front: a point is kept
    # unless some other point is no worse on all four figures (more accuracy and results per
    # second, fewer logic cells and less latency are better) and strictly better on one.
    def no_worse(a, b):
        return (a["accuracy"] >= b["accuracy"] and a["logic_cells"] <= b["logic_cells"]
                and a["results_per_s"] >= b["results_per_s"] and a["latency_ns"] <= b["latency_ns"])
    return {b["key"] for b in rows
            if not any(no_worse(a, b) and not no_worse(b, a) for a in rows)}


@pytest.mark.parametrize("seed", range(12))
def test_the_front_is_the_brute_force_front(seed):
    rows = random_rows(40, seed)
    front = pareto_front(rows)
    assert {r["key"] for r in front} == brute_force_front(rows)
    assert front and len(front) < len(rows)


def test_the_front_check_sees_a_dominated_point_kept():
    # The check above must be able to fail: a front with a dominated point added differs.
    rows = random_rows(40, 3)
    dominated = next(r for r in rows if r["key"] not in brute_force_front(rows))
    assert {r["key"] for r in pareto_front(rows)} | {dominated["key"]} != brute_force_front(rows)


def test_the_recommended_point_is_the_cheapest_meeting_the_constraints():
    rows = random_rows(60, 7)
    constraints = Constraints(min_accuracy=0.9, min_fmax_mhz=40, device="hx8k")
    chosen = recommend(rows, constraints)
    meeting = [r for r in rows if r["accuracy"] >= 0.9 and r["fmax_mhz"] >= 40
               and r["device"] == "hx8k"]
    assert chosen in meeting
    assert chosen["logic_cells"] == min(r["logic_cells"] for r in meeting)
    assert recommend(rows, Constraints())["logic_cells"] == min(r["logic_cells"] for r in rows)


def test_a_constraint_no_point_meets_names_the_nearest():
    rows = random_rows(30, 1)
    with pytest.raises(InputError, match="no point meets the constraints; nearest: .*accuracy "
                                         r"0\.9500 < 0\.99"):
        recommend(rows, Constraints(min_accuracy=0.99))
    with pytest.raises(InputError, match="latency"):
        recommend(rows, Constraints(max_latency_ns=1.0))


@pytest.mark.parametrize("axes, field", [
    ({"archs": ()}, "archs"), ({"devices": ()}, "devices"), ({"archs": ("tree", "tree")}, "archs"),
    ({"archs": ("adder",)}, "archs"), ({"devices": ("xc7",)}, "devices"),
    ({"weight_bits": (1,)}, "weight_bits"), ({"pipelines": (-1,)}, "pipelines"),
    ({"digit_budgets": (0,)}, "digit_budgets"), ({"placement_seeds": (True,)}, "placement_seeds"),
    ({"split_bits": [8]}, "split_bits")])
def test_a_bad_grid_is_refused_naming_its_axis(axes, field):
    with pytest.raises(InputError) as caught:
        Grid(**axes)
    assert caught.value.field == field


def test_the_grid_is_the_product_of_its_axes():
    grid = Grid(weight_bits=(4, None), archs=("tree", "serial"), pipelines=(1, 2, 3),
                devices=("up5k", "hx8k"), placement_seeds=(1, 2))
    assert grid.size == 2 * 1 * 2 * 3 * 1 * 2 * 2 == len(grid.trainings()) * len(grid.builds())
    assert len(set(grid.builds())) == len(grid.builds())


@pytest.mark.parametrize("kwargs", [{"min_accuracy": 1.5}, {"min_fmax_mhz": 0},
                                    {"device": "nope"}, {"max_latency_ns": -3}])
def test_bad_constraints_are_refused(kwargs):
    with pytest.raises(InputError):
        Constraints(**kwargs)


def test_the_cache_keeps_finished_records_and_not_failed_ones(tmp_path):
    cache = TaskCache(tmp_path / "points")
    key = content_key({"model": "m", "arch": "tree"})
    assert key != content_key({"model": "m", "arch": "shiftadd"})
    assert key == content_key({"arch": "tree", "model": "m"})       # order does not matter
    cache.store_failure(key, "boom", "a point")
    assert cache.record(key) is None                                # a failure is no result
    cache.store(key, {"accuracy": 0.5}, {"a.v": b"module a; endmodule\n"})
    assert cache.record(key) == {"accuracy": 0.5}
    assert not (tmp_path / "points" / f"{key}.failed.json").exists()
    cache.copy_folder(key, tmp_path / "copy")
    assert (tmp_path / "copy" / "a.v").read_bytes() == b"module a; endmodule\n"
    (tmp_path / "points" / f"{key}.json").write_text("{truncated")
    assert cache.record(key) is None                                # computed again


def summary_of(rows, recommended):
    return {"points": rows, "front": [r["key"] for r in pareto_front(rows)],
            "recommended": recommended["key"], "recommended_folder": "recommended",
            "failed": [{"what": "tree, pipeline 1", "error": "ToolError: <nextpnr> failed"}],
            "skipped": [], "grid_points": len(rows) + 1,
            "data": {"file": "rows.csv", "held_out_rows": 50},
            "verification": {"simulator": "icarus", "random_vectors": 2000},
            "constraints": {"min_accuracy": 0.9, "min_fmax_mhz": None, "device": None,
                            "max_latency_ns": None}}


def test_the_files_of_the_results_agree():
    rows = random_rows(25, 5)
    summary = summary_of(rows, recommend(rows, Constraints(min_accuracy=0.9)))
    assert json.loads(front_json(summary)) == summary
    table = list(csv.DictReader(io.StringIO(front_csv(summary))))
    assert tuple(table[0]) == CSV_COLUMNS and len(table) == len(rows)
    assert sum(r["recommended"] == "True" for r in table) == 1
    assert {r["key"] for r in table if r["on_front"] == "True"} == brute_force_front(rows)
    page = front_html(summary)
    parser = Structure()
    parser.feed(page)
    assert parser.errors == [] and parser.stack == [] and parser.loads == []
    assert "script" not in parser.tags and page.count("<svg") == 3
    assert page.count('r="9"') == 3                  # the recommended point ringed on each plot
    assert "&lt;nextpnr&gt; failed" in page          # text escaped
