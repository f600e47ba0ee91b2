"""The report's cost estimates: one per device (``thresh2hdl estimate --device``), each with
the part's capacity and the share of it the design takes.

Reports written before there was a device per estimate hold them by target (``ice40``,
``ecp5``), and older still a single ``estimate``; both read as the device their nextpnr
arguments select (the UP5K, the LFE5U-25F), so a new estimate on that part replaces them.
"""

from dataclasses import dataclass

from ..cost import (CAPACITY_NAMES, DEVICES, LUT4_RULES, device_for_arguments, device_name,
                    lut4_equivalents, needs_text, share_used)
from .fields import present

__all__ = ["Shortfall", "GuardCost", "CostEstimate", "estimates_of", "read_estimates",
           "store_estimate", "device_key"]


@dataclass(frozen=True)
class Shortfall:
    """What a design that was not placed needs beyond the device, for one resource."""
    resource: str
    cell: str | None
    needed: int
    available: int

    def to_json(self):
        return {"resource": self.resource, **present([("cell", self.cell)]),
                "needed": self.needed, "available": self.available}


@dataclass(frozen=True)
class GuardCost:
    """The input guard's cost: the estimate less the same design synthesised without it."""
    lut4_equivalents: int
    flip_flops: int
    without_guard: dict             # the synthesis figures of the design without it

    def to_json(self):
        return {"lut4_equivalents": self.lut4_equivalents, "flip_flops": self.flip_flops,
                "without_guard": dict(self.without_guard)}


@dataclass(frozen=True)
class CostEstimate:
    """One device's synthesis and place-and-route figures. Older reports lack the device's
    key and name, the LUT4 equivalents and their rule, the logic cells and the capacity: they
    are worked out from the nextpnr arguments and the cell counts where they can be."""
    target: str
    device: str                      # nextpnr's device and package arguments
    luts: int
    carries: int
    flip_flops: int
    dsps: int
    fmax_mhz: float | None           # None when not placed
    tool_versions: dict              # yosys, nextpnr
    device_name: str | None = None
    lut4_equivalents: int | None = None
    lut4_rule: str | None = None
    dsp_inference: bool | None = None
    placed: bool | None = None       # older reports: absent, and placed
    cells: dict | None = None
    method: str | None = None
    does_not_fit: tuple | None = None
    input_guard: GuardCost | None = None
    device_id: str | None = None     # the --device name
    logic_cells: int | None = None   # nextpnr's count (see logic_cell_rule)
    logic_cell_rule: str | None = None
    ram_blocks: int | None = None
    capacity: dict | None = None     # logic_cells, flip_flops, dsps, ram_blocks
    share_used: dict | None = None   # the same keys: used / capacity

    @property
    def name(self):
        return self.device_name or device_name(self.target, self.device.split())

    @property
    def key(self):
        """The device's key: recorded, or the known part the nextpnr arguments select."""
        return self.device_id or device_key(self.target, self.target, self.device)

    @property
    def equivalents(self):
        if self.lut4_equivalents is not None:
            return self.lut4_equivalents
        return lut4_equivalents(self.target, self.luts, self.carries)

    @property
    def rule(self):
        return self.lut4_rule or LUT4_RULES.get(self.target, "")

    @property
    def is_placed(self):
        return self.placed is None or self.placed

    def used(self):
        """What the design takes of each resource counted: ``{resource: (used, capacity,
        share)}``; an older estimate's capacity is its known part's, without logic cells."""
        capacity = self.capacity
        if capacity is None:
            part = DEVICES.get(self.key)
            capacity = part.capacity if part else {}
        counts = {"logic_cells": self.logic_cells, "flip_flops": self.flip_flops,
                  "dsps": self.dsps, "ram_blocks": self.ram_blocks}
        shares = self.share_used or share_used(counts, capacity)
        # Block RAMs only where the design has some: no architecture uses them yet.
        return {key: (counts[key], have, shares.get(key)) for key, have in capacity.items()
                if counts.get(key) is not None and (have or counts[key])
                and (key != "ram_blocks" or counts[key])}

    def capacity_text(self):
        """The shares in words: "412 of 5,280 logic cells (7.8%), ..."."""
        return ", ".join(f"{used:,} of {have:,} {CAPACITY_NAMES.get(key, key)}"
                         + (f" ({share:.1%})" if share is not None else "")
                         for key, (used, have, share) in self.used().items())

    def shortfall_text(self):
        """What a design that was not placed needs beyond the device, in words."""
        return needs_text(self.name, [s.to_json() for s in self.does_not_fit or ()])

    def to_json(self):
        return {"target": self.target, "device": self.device, **present([
            ("device_id", self.device_id), ("device_name", self.device_name),
            ("lut4_equivalents", self.lut4_equivalents), ("lut4_rule", self.lut4_rule),
            ("logic_cells", self.logic_cells), ("logic_cell_rule", self.logic_cell_rule)]),
            "luts": self.luts, "carries": self.carries,
            "flip_flops": self.flip_flops, "dsps": self.dsps,
            **present([("ram_blocks", self.ram_blocks), ("capacity", self.capacity),
                       ("share_used", self.share_used),
                       ("dsp_inference", self.dsp_inference), ("placed", self.placed)]),
            "fmax_mhz": self.fmax_mhz, **present([
                ("cells", self.cells), ("tool_versions", dict(self.tool_versions)),
                ("method", self.method),
                ("does_not_fit", None if self.does_not_fit is None else
                 [s.to_json() for s in self.does_not_fit]),
                ("input_guard", self.input_guard and self.input_guard.to_json())])}

    @classmethod
    def from_json(cls, table):
        placed = table.flag("placed", None)
        guard = table.table("input_guard", None, null=True)
        versions = table.table("tool_versions")
        missing = table.tables("does_not_fit", None)
        return cls(
            table.text("target"), table.text("device"), table.count("luts"),
            table.count("carries"), table.count("flip_flops"), table.count("dsps"),
            table.number("fmax_mhz", None, null=True) if placed is False else
            table.number("fmax_mhz"),
            {"yosys": versions.text("yosys"), "nextpnr": versions.text("nextpnr")},
            table.text("device_name", None), table.count("lut4_equivalents", None),
            table.text("lut4_rule", None), table.flag("dsp_inference", None), placed,
            table.mapping("cells", lambda v: type(v) is int, "counts", None),
            table.text("method", None),
            None if missing is None else tuple(Shortfall(
                m.text("resource"), m.text("cell", None), m.integer("needed"),
                m.integer("available")) for m in missing),
            guard and GuardCost(guard.integer("lut4_equivalents"), guard.integer("flip_flops"),
                                _without_guard(guard)),
            table.text("device_id", None), table.natural("logic_cells", None),
            table.text("logic_cell_rule", None), table.count("ram_blocks", None),
            table.mapping("capacity", _is_count, "counts", None),
            table.mapping("share_used", _is_share, "numbers", None))


def _is_count(value):
    return type(value) is int and value >= 0


def _is_share(value):
    return isinstance(value, (int, float)) and not isinstance(value, bool) and value >= 0


def _without_guard(guard):
    figures = guard.table("without_guard")
    figures.count("lut4_equivalents")
    return dict(figures.value)


def device_key(key, target, arguments):
    """The key an estimate stored under ``key`` goes under now: a target's (an older report)
    becomes the part its nextpnr ``arguments`` select; any other key stays."""
    part = device_for_arguments(target, arguments or "")
    return part.key if part is not None and key == target else key


def _in_device_order(found):
    order = {key: index for index, key in enumerate(DEVICES)}
    return {k: found[k] for k in sorted(found, key=lambda k: (order.get(k, len(order)), k))}


def _key_of(key, figures):
    if not isinstance(figures, dict):
        return key
    return figures.get("device_id") or device_key(key, figures.get("target"),
                                                  figures.get("device"))


def estimates_of(report):
    """A report.json's estimates by device, in the order of DEVICES, as its tables. Older
    reports' per-target estimates, and a single ``estimate``, read as their part's."""
    found = {}
    for key, figures in (report.get("estimates") or {}).items():
        found.setdefault(_key_of(key, figures), figures)
    older = report.get("estimate")
    if older:
        found.setdefault(_key_of(older.get("target"), older), older)
    return _in_device_order(found)


def read_estimates(table):
    """:func:`estimates_of` for a loaded report: ``{device: CostEstimate}``."""
    found = {}
    for name, figures in table.named_tables("estimates", None) or ():
        estimate = CostEstimate.from_json(figures)
        found.setdefault(estimate.device_id or device_key(name, estimate.target,
                                                          estimate.device), estimate)
    older = table.table("estimate", None, null=True)
    if older is not None and older.value:
        estimate = CostEstimate.from_json(older)
        found.setdefault(estimate.key, estimate)
    return _in_device_order(found)


def store_estimate(report, figures):
    """Put ``figures`` in a report.json's data as its device's estimate, keeping the other
    devices' (an older estimate of the same part is replaced)."""
    estimates = estimates_of(report)
    estimates[figures["device_id"]] = figures
    report.pop("estimate", None)
    report["estimates"] = _in_device_order(estimates)
