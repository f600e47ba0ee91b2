"""Exact range and width analysis of one threshold unit over the declared input ranges: the
one entry point, which picks the plan of the unit's architecture.

The score ``w . x + b`` is a sum of independent terms, so interval arithmetic over it is exact:
every bound the plans state is reached by some input inside the declared ranges (the
witnesses). The adder tree is planned here, once, and both the circuit and the report read the
plan, so the width the report states is the width the circuit has.
"""

from ..errors import InputError
from .loadable import analyse_loadable
from .records import check_architecture
from .serial import analyse_serial
from .tree import analyse_constant

__all__ = ["analyse"]


def analyse(model, *, score_bits=None, arch="tree", unit_index=None, weight_range=None,
            bias_range=None, sharing=None, dsp_products=None):
    """Plan the adder tree of ``model.unit`` and size every node exactly.

    ``score_bits`` (default: the model's, else the minimum) may be wider than needed; the extra
    bits are reported as headroom. A narrower request is refused: it could overflow.
    ``arch="shiftadd"`` has no multipliers: each weight's magnitude is recoded in canonical
    signed digits and every nonzero digit becomes a shifted input, a leaf of the same tree.
    ``arch="serial"`` plans one multiply-accumulate that takes a feature per beat (nodes
    :data:`~.records.SERIAL_NODES`).
    ``weight_range`` and ``bias_range`` (``(lo, hi)``, both or neither) plan loadable weights:
    every weight and the bias may be any value in its declared range, and every width holds
    every score those allow (the trained values are only where the registers start).
    ``sharing`` (shiftadd, a bank's unit): the bank's :class:`~.shared.SharingPlan`.
    ``dsp_products`` (loadable tree): products kept whole, the rest rows (:mod:`.rows`).
    """
    check_architecture(arch)
    if sharing is not None and arch != "shiftadd":
        raise InputError("terms are shared between shift-add sums only; use arch shiftadd",
                         field="share_terms")
    unit = model.unit if unit_index is None else model.units[unit_index]
    if score_bits is None:
        score_bits = model.score_bits
    if weight_range is not None:
        if arch == "shiftadd":
            raise InputError("shiftadd recodes each constant weight into shifts and adds, so "
                             "its weights cannot be loaded; use arch tree or serial",
                             field="weight_range")
        return analyse_loadable(model, unit, score_bits, arch, weight_range, bias_range,
                                dsp_products)
    if arch == "serial":
        return analyse_serial(model, unit, score_bits)
    return analyse_constant(model, unit, score_bits, arch, sharing, unit_index)
