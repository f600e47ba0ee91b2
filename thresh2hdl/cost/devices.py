"""The FPGA parts `estimate --device` knows: each one's family (which Yosys synthesis), its
nextpnr arguments (device and a package it comes in) and its capacity, so that an estimate can
say what share of the part a design takes and whether it fits."""

from dataclasses import dataclass

from ..errors import InputError

__all__ = ["Device", "DEVICES", "FAMILY_DEFAULT", "CAPACITY_NAMES", "choose_device",
           "device_for_arguments"]


@dataclass(frozen=True)
class Device:
    """One part: ``key`` is the name ``--device`` takes."""
    key: str
    family: str            # "ice40" or "ecp5": the Yosys synthesis and the nextpnr program
    name: str              # the vendor's part name
    arguments: tuple       # nextpnr's device and package arguments
    logic_cells: int       # iCE40: logic cells (LUT4 + flip-flop + carry); ECP5: LUT4s
    flip_flops: int
    dsps: int              # SB_MAC16 on iCE40 UltraPlus, MULT18X18D (18x18) on ECP5
    ram_blocks: int        # SB_RAM40_4K (4 kbit) on iCE40, DP16KD (18 kbit) on ECP5

    @property
    def capacity(self):
        return {"logic_cells": self.logic_cells, "flip_flops": self.flip_flops,
                "dsps": self.dsps, "ram_blocks": self.ram_blocks}


# Capacities. iCE40: "iCE40 UltraPlus Family Data Sheet" (FPGA-DS-02008, Table 1.1: UP5K 5,280
# LUTs, 30 EBR blocks of 4 kbit, 8 DSP blocks; its four SPRAM blocks are not counted here) and
# "iCE40 LP/HX Family Data Sheet" (DS1040 / FPGA-DS-02029, Table 1-1: HX8K 7,680 logic cells,
# 32 RAM4K blocks, no DSP); an iCE40 logic cell holds one LUT4 and one flip-flop. ECP5: "ECP5
# and ECP5-5G Family Data Sheet" (FPGA-DS-02012, Table 1.1: LFE5U-25F/45F/85F 24K/44K/84K
# LUTs, 56/108/208 EBR blocks of 18 kbit, 28/72/156 18x18 multipliers); a slice holds two
# LUT4s and two flip-flops. The data sheets round the ECP5 LUT counts to thousands: the exact
# counts are those nextpnr-ecp5 0.11.1's chip database gives (its "Device utilisation" table:
# TRELLIS_COMB and TRELLIS_FF 24288/43848/83640), as are the iCE40 ones (ICESTORM_LC
# 5280/7680, ICESTORM_RAM 30/32, ICESTORM_DSP 8), checked by the estimate tests. Packages:
# each one exists for its part in the data sheet's ordering tables (sg48: 48-pin QFN; ct256,
# CABGA256, CABGA381: BGAs), and nextpnr accepts it for that device.
DEVICES = {d.key: d for d in [
    Device("up5k", "ice40", "UP5K", ("--up5k", "--package", "sg48"), 5280, 5280, 8, 30),
    Device("hx8k", "ice40", "HX8K", ("--hx8k", "--package", "ct256"), 7680, 7680, 0, 32),
    Device("ecp5-25", "ecp5", "LFE5U-25F", ("--25k", "--package", "CABGA256"),
           24288, 24288, 28, 56),
    Device("ecp5-45", "ecp5", "LFE5U-45F", ("--45k", "--package", "CABGA381"),
           43848, 43848, 72, 108),
    Device("ecp5-85", "ecp5", "LFE5U-85F", ("--85k", "--package", "CABGA381"),
           83640, 83640, 156, 208),
]}
# The part `--target` alone picks: the one each family was estimated on before --device.
FAMILY_DEFAULT = {"ice40": "up5k", "ecp5": "ecp5-25"}
CAPACITY_NAMES = {"logic_cells": "logic cells", "flip_flops": "flip-flops",
                  "dsps": "DSP blocks", "ram_blocks": "block RAMs"}
_FAMILY_NAMES = {"ice40": "iCE40", "ecp5": "ECP5"}


def choose_device(device=None, target=None):
    """The :class:`Device` for ``--device`` and/or ``--target`` (neither: the UP5K). An
    unknown name, or a part of another family than ``target``, is an InputError."""
    if device is None:
        if target is not None and target not in FAMILY_DEFAULT:
            raise InputError(f"unknown target {target!r}; choose one of "
                             f"{', '.join(FAMILY_DEFAULT)}", field="target")
        return DEVICES[FAMILY_DEFAULT[target or "ice40"]]
    chosen = DEVICES.get(str(device).lower())
    if chosen is None:
        raise InputError(f"unknown device {device!r}; choose one of {', '.join(DEVICES)}",
                         field="device")
    if target is not None and chosen.family != target:
        family = _FAMILY_NAMES.get(chosen.family, chosen.family)
        raise InputError(f"device {chosen.key} is an {family} part, not {target}; drop "
                         f"--target or give --target {chosen.family}", field="device")
    return chosen


def device_for_arguments(target, arguments):
    """The known part an older estimate's nextpnr arguments (``--up5k --package sg48``)
    select, or None."""
    words = tuple(str(arguments).split())
    return next((d for d in DEVICES.values()
                 if d.family == target and words[:1] == d.arguments[:1]), None)
