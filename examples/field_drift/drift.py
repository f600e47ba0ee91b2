"""A conveyor motor's overload trip whose current sensor drifts (SYNTHETIC scenario, invented
for the thresh2hdl examples; the numbers describe no real machine).

Four 12-bit ADC codes per window: current RMS, current peak, winding temperature, vibration.
A window is an overload when a hidden weighted sum of the *physical* quantities passes a
limit. The unit is trained on codes from a freshly calibrated sensor; a year later the current
channel reads 18% high with an offset, so the same physical state gives larger codes and the
trip starts firing on healthy windows. A slower thermal model labels windows in the field,
and the unit learns from those labels on chip.

Run ``python drift.py OUT_DIR`` to write ``before.csv`` (training, calibrated sensor) and
``after.csv`` (labelled windows after the drift), then follow README.md beside this file.
"""

import csv
import sys
from pathlib import Path

import numpy as np

FEATURES = ("current_rms", "current_peak", "winding_temp", "vibration")
TRUE_WEIGHTS = np.array([3.0, 1.0, 2.0, 0.5])     # of the physical quantities, in code units
TRUE_LIMIT = 10_500.0
GAIN, OFFSET = 1.18, 120                          # the current channel after the drift
FULL_SCALE = 4095


def windows(rng, count):
    """Physical states (as calibrated codes) and their overload labels."""
    load = rng.uniform(0.2, 1.0, count)
    current = load * 2600 + rng.normal(0, 120, count)
    physical = np.stack([current, current * 1.35 + rng.normal(0, 150, count),
                         load * 1500 + 900 + rng.normal(0, 200, count),
                         rng.uniform(200, 3000, count)], axis=1)
    physical = np.clip(physical, 0, FULL_SCALE)
    labels = (physical @ TRUE_WEIGHTS > TRUE_LIMIT).astype(np.int64)
    return physical, labels


def scenario(seed=0, before=3000, after=2000):
    """``(before_codes, before_labels, after_codes, after_labels)``: the codes of a calibrated
    sensor, and of the drifted one (the current channels scaled and offset, clipped at full
    scale) for new windows, labelled by the physical state."""
    rng = np.random.default_rng(seed)
    physical, labels = windows(rng, before)
    codes = np.rint(physical).astype(np.int64)
    later, later_labels = windows(rng, after)
    drifted = later.copy()
    drifted[:, :2] = later[:, :2] * GAIN + OFFSET
    drifted = np.clip(np.rint(drifted), 0, FULL_SCALE).astype(np.int64)
    return codes, labels, drifted, later_labels


def write_csv(path, codes, labels):
    with open(path, "w", newline="") as handle:
        writer = csv.writer(handle)
        writer.writerow([*FEATURES, "label"])
        writer.writerows([*map(int, row), int(label)] for row, label in zip(codes, labels))


def main(out_dir):
    out_dir = Path(out_dir)
    out_dir.mkdir(parents=True, exist_ok=True)
    codes, labels, drifted, drifted_labels = scenario()
    write_csv(out_dir / "before.csv", codes, labels)
    write_csv(out_dir / "after.csv", drifted, drifted_labels)
    print(f"wrote {out_dir / 'before.csv'} ({len(labels)} windows) and "
          f"{out_dir / 'after.csv'} ({len(drifted_labels)} windows after the drift); synthetic")


if __name__ == "__main__":
    main(sys.argv[1] if len(sys.argv) > 1 else ".")
