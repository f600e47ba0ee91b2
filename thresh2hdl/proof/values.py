"""A value of the proof's plan: what the design computes at one point, its stage, exact range
and linear form (:class:`Value`), shared by the plan (:mod:`.forms`) and its split adders'
pieces (:mod:`.split`)."""

from dataclasses import dataclass

__all__ = ["Value", "form_range"]


@dataclass
class Value:
    name: str
    kind: str          # input, product, scaled, add, sub, rsub, bias, const, compare, max, pick,
                       # flag, whole (a split score joined for the argmax); loadable weights:
                       # mul (a feature times its weight register), addreg (an operand plus
                       # the bias register)
    operands: tuple    # names of other values
    stage: int
    lo: int
    hi: int
    signed: bool
    coeffs: dict | None = None   # feature -> coefficient of the linear form (None: argmax)
    constant: int = 0
    feature: int | None = None
    magnitude: int = 0
    first: int = 0     # argmax values: the unit indices they cover
    last: int = 0
    register_shift: int = 0   # a shifted input's registers carry value >> register_shift
    features: tuple = ()      # a flag of the inputs: the features whose codes it tests
    register: str | None = None   # mul, addreg: the weight or bias register it reads
    parts: int = 1            # a split adder: its part count (its value: the parts' sum)
    piece: dict | None = None  # a split adder's piece (psum, plow, pcarry, ptop, pnot, dstep):
                               # what its formula reads (see :mod:`.split`)


def form_range(coeffs, constant, ranges):
    lo = hi = constant
    for feature, c in coeffs.items():
        a, b = c * ranges[feature][0], c * ranges[feature][1]
        lo, hi = lo + min(a, b), hi + max(a, b)
    return lo, hi
