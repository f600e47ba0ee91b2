"""The input guard: what the circuit does with codes outside the declared feature ranges.

The widths are sized for the declared ranges only, so a port wider than its range can carry
codes (an ADC glitch, an open input, a mis-wired bus) that would overflow an adder and give a
silently wrong score. The guard makes every code the port can carry defined: ``clamp`` moves
each feature to the nearest bound of its declared range before the arithmetic, and ``flag``
raises an output bit with every result whose input had a feature outside its range. With the
flag alone the arithmetic sees the raw codes, so the results of flagged inputs are not
specified (only the flag is); with neither, only the declared ranges are specified.

This module is the one definition that the circuit, the reference model, the vectors, every
simulator and the proof follow.
"""

from dataclasses import dataclass

import numpy as np

__all__ = ["InputGuard", "resolve_guard", "guard_words"]


@dataclass(frozen=True)
class InputGuard:
    """The declared ranges, the ports' code ranges, and the two choices."""

    feature_ranges: tuple     # declared (lo, hi) per feature
    code_ranges: tuple        # what each port can carry (lo, hi)
    clamp: bool
    flag: bool

    @property
    def needed(self):
        """Whether some port can carry a code outside its declared range."""
        return any(r != c for r, c in zip(self.feature_ranges, self.code_ranges))

    @property
    def tight(self):
        """Indices of the features whose declared range is tighter than their port."""
        return tuple(i for i, (r, c) in enumerate(zip(self.feature_ranges, self.code_ranges))
                     if r != c)

    def tests_of(self, index):
        """How many comparisons tell whether feature ``index`` is outside its range (0 to 2:
        below its low bound, above its high one, each only where the port can go there)."""
        (lo, hi), (code_lo, code_hi) = self.feature_ranges[index], self.code_ranges[index]
        return int(lo > code_lo) + int(hi < code_hi)

    @property
    def flag_layers(self):
        """The out-of-range flag as a tree of ORs of at most four inputs, a LUT4 each (common
        practice): layer 0 groups the features' comparisons (a tuple of feature indices per
        group), each later layer groups the layer below (a tuple of its group indices); the
        last layer has one group, the flag. The circuit makes layer ``j`` with the datapath's
        level ``j``, so that register stages cut the tree where they cut the adders."""
        groups, current, tests = [], [], 0
        for index in self.tight:
            count = self.tests_of(index)
            if current and tests + count > 4:
                groups.append(tuple(current))
                current, tests = [], 0
            current.append(index)
            tests += count
        if current or not groups:
            groups.append(tuple(current))      # (with nothing to test, one empty group: 0)
        layers = [tuple(groups)]
        while len(layers[-1]) > 1:
            below = len(layers[-1])
            layers.append(tuple(tuple(range(k, min(k + 4, below))) for k in range(0, below, 4)))
        return tuple(layers)

    @property
    def every_code_defined(self):
        """Whether the decision and score are specified for every port code."""
        return self.clamp or not self.needed

    @property
    def test_outside(self):
        """Whether verification should drive codes outside the declared ranges."""
        return self.needed and (self.clamp or self.flag)

    def apply(self, vectors):
        """The codes the arithmetic sees: clamped to the declared ranges when ``clamp``."""
        vectors = np.asarray(vectors, dtype=np.int64)
        if not self.clamp or not self.needed:
            return vectors
        lo = np.array([r[0] for r in self.feature_ranges], dtype=np.int64)
        hi = np.array([r[1] for r in self.feature_ranges], dtype=np.int64)
        return np.clip(vectors, lo, hi)

    def outside(self, vectors):
        """Per row: whether any feature lies outside its declared range."""
        vectors = np.asarray(vectors, dtype=np.int64).reshape(-1, len(self.feature_ranges))
        if not self.needed:
            return np.zeros(len(vectors), dtype=bool)
        lo = np.array([r[0] for r in self.feature_ranges], dtype=np.int64)
        hi = np.array([r[1] for r in self.feature_ranges], dtype=np.int64)
        return ((vectors < lo) | (vectors > hi)).any(axis=1)


def resolve_guard(model, *, clamp=None, flag=None, code_ranges=None):
    """The guard of a build: ``None`` choices take the default, which is both on whenever some
    declared range is tighter than its port and both off (nothing to guard) otherwise.
    ``code_ranges``: what the port carrying each feature can hold, when that is not the
    feature's own format (the serial design's one ``sample`` bus carries every feature)."""
    for name, value in (("clamp", clamp), ("flag", flag)):
        if value is not None and not isinstance(value, bool):
            raise ValueError(f"{name} must be True, False or None, not {value!r}")
    ranges = tuple(f.feature_range for f in model.features)
    codes = tuple(f.code_range for f in model.features) if code_ranges is None \
        else tuple(tuple(c) for c in code_ranges)
    needed = ranges != codes
    return InputGuard(feature_ranges=ranges, code_ranges=codes,
                      clamp=needed if clamp is None else clamp,
                      flag=needed if flag is None else flag)


def guard_words(guard):
    """One sentence for the report: what the circuit does with a code outside its range."""
    if not guard.needed:
        return ("every declared range fills its port, so every code the ports can carry is "
                "inside the ranges the widths are sized for; no guard logic is needed")
    count = len(guard.tight)
    head = f"{count} feature(s) have a declared range tighter than their port: "
    if guard.clamp and guard.flag:
        return head + ("a code outside its range is clamped to the nearest bound before the "
                       "arithmetic, and the out-of-range output is high with that result")
    if guard.clamp:
        return head + ("a code outside its range is clamped to the nearest bound before the "
                       "arithmetic (no out-of-range output)")
    if guard.flag:
        return head + ("the out-of-range output is high with the result of an input that had "
                       "a code outside its range; that result's decision and score are NOT "
                       "specified (the arithmetic sees the raw code: no clamp)")
    return head + ("the guard is turned off: a code outside its range can overflow the "
                   "arithmetic and give a wrong decision and score with no sign of it; drive "
                   "only codes inside the declared ranges")
