"""``explore`` on scikit-learn's bundled 8x8 digits, from a float model, locally and on a
two-worker Dask LocalCluster.

    pip install -e '.[synth,cluster,test]'   (Icarus Verilog on PATH)
    python benchmarks/explore_digits.py

The 1,797 rows (raw codes 0..16) go to a CSV; a standardised logistic regression fitted on
them is saved as a float model (.npz), the start. The grid: 4-bit weights, budgets of 150 and
250 signed digits in all, shiftadd at two register stages on the iCE40 HX8K (a quarter of
the rows held out). The exploration runs in a local pool, then into a fresh folder on a
two-worker LocalCluster; the two front.json must agree apart from their ``run``. Each point's
figures are printed, and the point recommended with and without ``--min-accuracy 0.95``.
"""

import sys
import tempfile
import time
from pathlib import Path

import numpy as np
from distributed import LocalCluster
from sklearn.datasets import load_digits
from sklearn.linear_model import LogisticRegression
from sklearn.preprocessing import StandardScaler

import thresh2hdl

GRID = thresh2hdl.Grid(weight_bits=(4,), digit_budgets=(150, 250), archs=("shiftadd",),
                       pipelines=(2,), devices=("hx8k",))


def digits_inputs(folder):
    x, y = load_digits(return_X_y=True)
    x = x.astype(np.int64)
    lines = [",".join(f"p{i}" for i in range(64)) + ",label"]
    lines += [",".join(map(str, row)) + f",{label}" for row, label in zip(x.tolist(), y)]
    (folder / "digits.csv").write_text("\n".join(lines) + "\n")
    scaler = StandardScaler().fit(x)
    scale = np.where(scaler.scale_ > 0, scaler.scale_, 1.0)
    fitted = LogisticRegression(max_iter=5000).fit((x - scaler.mean_) / scale, y)
    np.savez(folder / "digits_float.npz", coef=fitted.coef_, intercept=fitted.intercept_,
             offset=scaler.mean_, scale=scale, input_lo=np.zeros(64, int),
             input_hi=np.full(64, 16), classes=np.arange(10))
    return folder / "digits.csv", folder / "digits_float.npz"


def without_run(summary):
    return {key: value for key, value in summary.items() if key != "run"}


def main():
    with tempfile.TemporaryDirectory(prefix="thresh2hdl-explore-digits-") as scratch:
        scratch = Path(scratch)
        data, start = digits_inputs(scratch)
        started = time.perf_counter()
        local = thresh2hdl.explore(data, scratch / "local", GRID, start=start)
        print(f"local pool: {time.perf_counter() - started:.1f} s")
        with LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                          dashboard_address=None) as cluster:
            started = time.perf_counter()
            on_dask = thresh2hdl.explore(data, scratch / "dask", GRID, start=start,
                                         scheduler=cluster.scheduler_address)
            print(f"two-worker LocalCluster: {time.perf_counter() - started:.1f} s")
        same = without_run(local.summary) == without_run(on_dask.summary)
        print(f"same results: {same}")
        for row in local.summary["points"]:
            print(f"  at most {row['digit_budget']} digits: accuracy {row['accuracy']:.4f}, "
                  f"{row['logic_cells']} logic cells, {row['fmax_mhz']:.1f} MHz")
        print(f"recommended: at most {local.recommended['digit_budget']} digits")
        strict = thresh2hdl.explore(data, scratch / "local", GRID, start=start,
                                    constraints=thresh2hdl.Constraints(min_accuracy=0.95))
        print(f"recommended with --min-accuracy 0.95: at most "
              f"{strict.recommended['digit_budget']} digits ({strict.computed} tasks run)")
        if not same:
            sys.exit("the local and Dask explorations differ")


if __name__ == "__main__":
    main()
