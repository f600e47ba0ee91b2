"""The design space an exploration covers, and the constraints that pick its recommended point.

A :class:`Grid` is the product of its axes: how the model is made (weight bits, digit budgets
in all), how it is built (architecture, pipeline depth, split width) and where it is placed
(device, placement seed). ``None`` on a model axis means the starting point's own choice (fit's
default width, quantize's sweep, an integer model as it is); on ``split_bits``, no split.
"""

from dataclasses import dataclass
from itertools import product

from ..analysis import ARCHITECTURES
from ..cost import DEVICES
from ..errors import InputError

__all__ = ["Grid", "Constraints", "DEFAULT_GRID", "AXES"]

# Each axis: its field, the word an error names it by, and what one value may be.
AXES = {
    "weight_bits": "weight bits", "digit_budgets": "digit budgets", "archs": "architectures",
    "pipelines": "pipeline depths", "split_bits": "split widths", "devices": "devices",
    "placement_seeds": "placement seeds",
}


def _whole(value, lo, hi, key, *, none_ok=False):
    if value is None and none_ok:
        return
    if isinstance(value, bool) or not isinstance(value, int) or not lo <= value <= hi:
        raise InputError(f"{value!r} is not a whole number from {lo} to {hi}"
                         + (" or none" if none_ok else ""), field=key)


@dataclass(frozen=True)
class Grid:
    """Every axis a non-empty tuple of distinct values, checked once here."""

    weight_bits: tuple = (4, 8)
    digit_budgets: tuple = (None,)
    archs: tuple = ("tree", "shiftadd")
    pipelines: tuple = (1, 2)
    split_bits: tuple = (None,)
    devices: tuple = ("up5k",)
    placement_seeds: tuple = (1,)

    def __post_init__(self):
        for key, words in AXES.items():
            values = getattr(self, key)
            if not isinstance(values, tuple):
                raise InputError(f"must be a tuple of values, not {values!r}", field=key)
            if not values:
                raise InputError(f"the grid is empty: no {words} given; give at least one",
                                 field=key)
            if len(set(values)) != len(values):
                raise InputError(f"{words} are listed twice: {list(values)}", field=key)
        for value in self.weight_bits:
            _whole(value, 2, 32, "weight_bits", none_ok=True)
        for value in self.digit_budgets:
            _whole(value, 1, 1 << 30, "digit_budgets", none_ok=True)
        for value in self.archs:
            if value not in ARCHITECTURES:
                raise InputError(f"unknown architecture {value!r}; choose from "
                                 f"{', '.join(ARCHITECTURES)}", field="archs")
        for value in self.pipelines:
            _whole(value, 0, 64, "pipelines")
        for value in self.split_bits:
            _whole(value, 1, 64, "split_bits", none_ok=True)
        for value in self.devices:
            if value not in DEVICES:
                raise InputError(f"unknown device {value!r}; choose from {', '.join(DEVICES)}",
                                 field="devices")
        for value in self.placement_seeds:
            _whole(value, 0, (1 << 31) - 1, "placement_seeds")

    def trainings(self):
        """Each way of making the model: ``(weight_bits, digit_budget)``."""
        return list(product(self.weight_bits, self.digit_budgets))

    def builds(self):
        """Each way of building and placing one model:
        ``(arch, pipeline, split_bits, device, placement_seed)``."""
        return list(product(self.archs, self.pipelines, self.split_bits, self.devices,
                            self.placement_seeds))

    @property
    def size(self):
        return len(self.trainings()) * len(self.builds())

    def as_dict(self):
        return {key: list(getattr(self, key)) for key in AXES}


DEFAULT_GRID = Grid()


@dataclass(frozen=True)
class Constraints:
    """What the recommended point must meet: held-out accuracy, fmax (MHz), the device, and a
    cap on the latency from a taken input to its result (ns). None: no constraint."""

    min_accuracy: float | None = None
    min_fmax_mhz: float | None = None
    device: str | None = None
    max_latency_ns: float | None = None

    def __post_init__(self):
        if self.min_accuracy is not None and not (
                isinstance(self.min_accuracy, (int, float)) and 0 <= self.min_accuracy <= 1):
            raise InputError(f"must be a fraction from 0 to 1, not {self.min_accuracy!r}",
                             field="min_accuracy")
        for key in ("min_fmax_mhz", "max_latency_ns"):
            value = getattr(self, key)
            if value is not None and (isinstance(value, bool) or not isinstance(
                    value, (int, float)) or not 0 < value < 1e9):
                raise InputError(f"must be a positive number, not {value!r}", field=key)
        if self.device is not None and self.device not in DEVICES:
            raise InputError(f"unknown device {self.device!r}; choose from "
                             f"{', '.join(DEVICES)}", field="device")

    def as_dict(self):
        return {"min_accuracy": self.min_accuracy, "min_fmax_mhz": self.min_fmax_mhz,
                "device": self.device, "max_latency_ns": self.max_latency_ns}
