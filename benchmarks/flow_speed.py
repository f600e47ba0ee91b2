"""How long the demo folder's exported testbenches take in a user's flow: the FuseSoC core's
``sim`` target and the cocotb test module, both in Icarus Verilog.

    python benchmarks/flow_speed.py       (needs Icarus Verilog and pip install
                                          'thresh2hdl[test]' for fusesoc and cocotb)

The demo is built as ``thresh2hdl demo`` exports it (10,000 random vectors plus the corner
cases, about 14,600 cycles); each command runs from a fresh copy of the folder, three times,
and the median wall time is printed with the cycle count and the PASS line.
"""

import os
import shutil
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

from thresh2hdl import __version__
from thresh2hdl.app import BuildOptions, build, demo_model
from thresh2hdl.emit import core_name

RUNS = 3


def timed(command, cwd):
    env = {key: value for key, value in os.environ.items() if key != "PYTEST_CURRENT_TEST"}
    env.update(XDG_CACHE_HOME=str(cwd / "cache"), XDG_CONFIG_HOME=str(cwd / "config"))
    started = time.perf_counter()
    result = subprocess.run(command, cwd=cwd, env=env, capture_output=True, text=True)
    seconds = time.perf_counter() - started
    passed = [line[line.index("PASS"):].strip() for line in
              (result.stdout + result.stderr).splitlines() if "PASS pump_fault" in line]
    if result.returncode != 0 or not passed:
        sys.exit(f"{command[0]} failed:\n{result.stdout[-2000:]}{result.stderr[-2000:]}")
    return seconds, passed[0]


def main():
    with tempfile.TemporaryDirectory(prefix="flow-speed-") as temp:
        temp = Path(temp)
        folder = temp / "demo"
        build(demo_model(), folder, BuildOptions(simulator="icarus", vectors=10_000))
        cycles = len((folder / "stimulus.hex").read_text().split())
        fusesoc = str(Path(sys.executable).with_name("fusesoc"))
        commands = {
            "fusesoc run --target sim": lambda work: [
                fusesoc, "--cores-root", str(work / "demo"), "run", "--target", "sim",
                core_name("pump_fault", __version__)],
            "python test_pump_fault.py": lambda work: [
                sys.executable, str(work / "demo" / "test_pump_fault.py"), "--build-dir",
                str(work / "sim_build")],
        }
        print(f"demo folder: {cycles} cycles")
        for label, command in commands.items():
            times = []
            for run in range(RUNS):
                work = temp / f"{label.split()[0]}{run}"
                work.mkdir()
                shutil.copytree(folder, work / "demo")
                seconds, line = timed(command(work), work)
                times.append(seconds)
            print(f"{label}: median {statistics.median(times):.2f} s of {RUNS} "
                  f"({', '.join(f'{t:.2f}' for t in times)}); {line}")


if __name__ == "__main__":
    main()
