"""The bank plan: several units sharing the inputs, decided by the argmax of their scores.

Each unit is planned on its own (:func:`~.plan.analyse`), or, when the bank shares terms,
from the terms :func:`~.shared.plan_sharing` leaves it; the bank adds the argmax's comparison
levels after the scores and the width of the class index.
"""

from dataclasses import dataclass

from ..errors import InputError
from .plan import analyse
from .shared import plan_sharing

__all__ = ["BankPlan", "analyse_bank"]


@dataclass(frozen=True)
class BankPlan:
    """Several units sharing the inputs; the decision is the argmax of their scores."""

    units: tuple          # one Analysis per unit
    class_bits: int       # width of the class index
    argmax_levels: int    # two a round of comparisons: the comparisons, then the selections
    sharing: object = None   # the SharingPlan of a shift-add bank sharing terms, else None

    @property
    def tree_levels(self):
        return max(unit.tree_levels for unit in self.units)

    @property
    def score_level(self):
        """Level of the bias adders, common to every unit."""
        return self.tree_levels + 1

    @property
    def final_level(self):
        return self.score_level + self.argmax_levels

    @property
    def levels(self):
        """As :attr:`Analysis.levels`, with the argmax's comparison levels after the scores."""
        return 1 if self.units[0].arch == "serial" else self.final_level + 1

    def tournament(self, scores, merge):
        """The argmax as planned: neighbours compared round by round, the lower index on the
        left (it wins ties), an odd last entry carried up unpaired. A round takes two levels:
        the comparisons, then the selection of each winner, so that a register stage can sit
        between a comparator's carry chain and the multiplexers its result drives.
        ``merge(level, tag, left, right)`` makes the winner entry of two, comparing at
        ``level`` and selecting at ``level + 1``; returns the final entry."""
        layer, level, round_ = list(scores), self.score_level, 0
        while len(layer) > 1:
            level, round_ = level + 2, round_ + 1
            merged = [merge(level - 1, f"best{round_}_{k // 2}", layer[k],
                            layer[k + 1]) for k in range(0, len(layer) - 1, 2)]
            if len(layer) % 2:
                merged.append(layer[-1])
            layer = merged
        return layer[0]


def analyse_bank(model, *, score_bits=None, arch="tree", weight_range=None, bias_range=None,
                 share_terms=False):
    """Analyse every unit of a bank; ``score_bits`` (if given) is the width of every score port.
    ``share_terms`` (shiftadd, constant weights): terms several units need are made once."""
    if score_bits is None:
        score_bits = model.score_bits
    units = []
    sharing = plan_sharing([unit.weights for unit in model.units]) if share_terms else None
    loadable = {"weight_range": weight_range, "bias_range": bias_range, "sharing": sharing}
    for index in range(len(model.units)):
        own = analyse(model, arch=arch, unit_index=index, **loadable)
        if score_bits is not None:
            if score_bits < own.score_bits_min:
                raise InputError(f"score_bits {score_bits} cannot hold the score range "
                                 f"{list(own.score_range)} of unit {model.units[index].name}; "
                                 f"it needs at least {own.score_bits_min}", field="score_bits")
            own = analyse(model, arch=arch, unit_index=index, score_bits=score_bits,
                          **loadable)
        units.append(own)
    count = len(units)
    return BankPlan(units=tuple(units), class_bits=max(1, (count - 1).bit_length()),
                    argmax_levels=2 * (count - 1).bit_length(), sharing=sharing)
