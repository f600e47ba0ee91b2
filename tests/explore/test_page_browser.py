"""front.html in a real browser: headless Chromium loads it with no console errors."""

import subprocess

import pytest

from helpers import chromium
from thresh2hdl.explore import Constraints, front_html, pareto_front, recommend

pytestmark = pytest.mark.browser


def page_summary():
    rows = []
    for index, (accuracy, cells, fmax, cycles) in enumerate(
            [(0.90, 439, 22.5, 1), (0.90, 448, 36.1, 2), (0.92, 568, 21.5, 1),
             (0.92, 579, 36.1, 2), (0.90, 483, 34.0, 2), (0.92, 822, 29.2, 2)]):
        rows.append({"key": f"k{index}", "weight_bits": 4 if accuracy < 0.91 else 8,
                     "digit_budget": None, "arch": "shiftadd" if cells < 600 else "tree",
                     "pipeline": cycles, "split_bits": None, "device": "up5k",
                     "placement_seed": 1, "accuracy": accuracy, "logic_cells": cells,
                     "flip_flops": 40, "fmax_mhz": fmax, "results_per_s": fmax * 1e6,
                     "latency_cycles": cycles, "latency_ns": cycles * 1000 / fmax})
    return {"points": rows, "front": [r["key"] for r in pareto_front(rows)],
            "recommended": recommend(rows, Constraints(min_accuracy=0.91))["key"],
            "recommended_folder": "recommended", "grid_points": 8, "skipped": [],
            "failed": [{"what": "tree, pipeline 1", "error": "a tool failed"}],
            "data": {"file": "rows.csv", "held_out_rows": 500},
            "verification": {"simulator": "icarus", "random_vectors": 2000},
            "constraints": {"min_accuracy": 0.91}}


def test_the_front_page_loads_in_chromium_without_console_errors(tmp_path):
    browser = chromium()
    page = tmp_path / "front.html"
    page.write_text(front_html(page_summary()), encoding="utf-8")
    shot = tmp_path / "front.png"
    # Chromium (Debian's package), headless, no network: console messages go to stderr.
    result = subprocess.run([browser, "--headless", "--no-sandbox", "--disable-gpu",
                             "--disable-background-networking", "--enable-logging=stderr",
                             "--v=0", "--window-size=1000,1600", f"--screenshot={shot}",
                             page.as_uri()], capture_output=True, text=True, timeout=120)
    assert result.returncode == 0, result.stderr[-2000:]
    assert [line for line in result.stderr.splitlines() if "CONSOLE" in line] == []
    assert shot.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n" and shot.stat().st_size > 10_000
