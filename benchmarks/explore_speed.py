"""How much a second Dask worker speeds up an exploration, and that a resumed one redoes
nothing.

    pip install -e '.[synth,cluster]'   (Icarus Verilog on PATH)
    python benchmarks/explore_speed.py [--quick]

The demo scenario (synthetic rows) over 24 points: tree and shiftadd, pipelines 1 to 3, the
UP5K and the HX8K, placement seeds 1 and 2. The same exploration runs on a Dask LocalCluster
of one worker, then of two (one thread each, separate processes), each into a fresh folder;
the results must be the same apart from the timing, the ratio of the wall times is printed
and checked against the target (>= 1.7x on two cores). Then the two-worker exploration runs
again on its folder: it must compute nothing. ``--quick``: 4 points, no target (a smoke run).
"""

import sys
import tempfile
import time
from pathlib import Path

from distributed import LocalCluster

import thresh2hdl

TARGET = 1.7
FULL = thresh2hdl.Grid(weight_bits=(None,), archs=("tree", "shiftadd"), pipelines=(1, 2, 3),
                       devices=("up5k", "hx8k"), placement_seeds=(1, 2))
QUICK = thresh2hdl.Grid(weight_bits=(None,), archs=("tree", "shiftadd"), pipelines=(1, 2))


def explore_on(workers, out, grid):
    with LocalCluster(n_workers=workers, threads_per_worker=1, processes=True,
                      dashboard_address=None) as cluster:
        started = time.perf_counter()
        result = thresh2hdl.explore(None, out, grid, start="demo",
                                    scheduler=cluster.scheduler_address)
        return time.perf_counter() - started, result


def without_run(summary):
    return {key: value for key, value in summary.items() if key != "run"}


def main():
    quick = "--quick" in sys.argv[1:]
    grid = QUICK if quick else FULL
    with tempfile.TemporaryDirectory(prefix="thresh2hdl-explore-bench-") as scratch:
        scratch = Path(scratch)
        one_s, one = explore_on(1, scratch / "one", grid)
        print(f"1 worker : {len(one.summary['points'])} points in {one_s:.1f} s "
              f"({one.computed} tasks run)")
        two_s, two = explore_on(2, scratch / "two", grid)
        print(f"2 workers: {len(two.summary['points'])} points in {two_s:.1f} s "
              f"({two.computed} tasks run)")
        same = without_run(one.summary) == without_run(two.summary)
        print(f"same results: {same}")
        ratio = one_s / two_s
        print(f"speed-up with two workers: {ratio:.2f}x (target >= {TARGET}x)")
        again_s, again = explore_on(2, scratch / "two", grid)
        print(f"resumed  : {again.computed} tasks run, {again.reused} from the cache, "
              f"{again_s:.1f} s")
        assert same, "the one-worker and two-worker explorations differ"
        assert again.computed == 0, "the resumed exploration recomputed finished points"
        assert without_run(again.summary) == without_run(two.summary)
        if not quick and ratio < TARGET:
            sys.exit(f"target missed: {ratio:.2f}x < {TARGET}x")


if __name__ == "__main__":
    main()
