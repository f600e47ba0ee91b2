"""Which explored points are worth having, and which one to take.

A row is one finished point: its levers (how the model was made, built and placed) and its
figures. The front is every row no other row dominates on the four objectives of
:data:`OBJECTIVES`; the recommended row is the cheapest (fewest logic cells) that meets the
constraints, then the most accurate, the fastest, the shortest latency.
"""

from ..errors import InputError

__all__ = ["OBJECTIVES", "dominates", "pareto_front", "recommend", "point_label"]

# (figure, +1 when more is better, -1 when less is)
OBJECTIVES = (("accuracy", 1), ("logic_cells", -1), ("results_per_s", 1), ("latency_ns", -1))


def dominates(a, b):
    """``a`` is at least as good as ``b`` on every objective and better on one."""
    better = False
    for key, sense in OBJECTIVES:
        if sense * a[key] < sense * b[key]:
            return False
        better = better or sense * a[key] > sense * b[key]
    return better


def pareto_front(rows):
    """The rows no other row dominates, in their given order. Rows are few (hundreds), so the
    plain quadratic scan is fast enough and easy to check."""
    return [row for row in rows if not any(dominates(other, row) for other in rows)]


def point_label(row):
    """A point in words: "tree, pipeline 2, split 8, up5k seed 1, 6-bit weights"."""
    parts = [row["arch"], f"pipeline {row['pipeline']}"]
    if row.get("split_bits") is not None:
        parts.append(f"split {row['split_bits']}")
    parts.append(f"{row['device']} seed {row['placement_seed']}")
    bits = row.get("weight_bits")
    parts.append(f"{bits}-bit weights" if bits is not None else "the start's own weights")
    if row.get("digit_budget") is not None:
        parts.append(f"at most {row['digit_budget']} digits")
    return ", ".join(parts)


def _shortfalls(row, constraints):
    """Each constraint the row misses, in words, and by how much in all (relative)."""
    missed, total = [], 0.0
    if constraints.device is not None and row["device"] != constraints.device:
        missed.append(f"device {row['device']}, not {constraints.device}")
        total += 1.0
    if constraints.min_accuracy is not None and row["accuracy"] < constraints.min_accuracy:
        missed.append(f"accuracy {row['accuracy']:.4f} < {constraints.min_accuracy}")
        total += (constraints.min_accuracy - row["accuracy"]) / max(constraints.min_accuracy,
                                                                    1e-9)
    if constraints.min_fmax_mhz is not None and row["fmax_mhz"] < constraints.min_fmax_mhz:
        missed.append(f"fmax {row['fmax_mhz']:.1f} MHz < {constraints.min_fmax_mhz}")
        total += (constraints.min_fmax_mhz - row["fmax_mhz"]) / constraints.min_fmax_mhz
    if constraints.max_latency_ns is not None and row["latency_ns"] > constraints.max_latency_ns:
        missed.append(f"latency {row['latency_ns']:.1f} ns > {constraints.max_latency_ns}")
        total += (row["latency_ns"] - constraints.max_latency_ns) / constraints.max_latency_ns
    return missed, total


def _preference(row):
    return (row["logic_cells"], -row["accuracy"], -row["results_per_s"], row["latency_ns"],
            row["key"])


def recommend(rows, constraints):
    """The cheapest row meeting ``constraints``; an InputError naming the nearest row and what
    it misses when none does (the rows themselves are kept by the caller)."""
    if not rows:
        raise InputError("no point of the grid finished, so none can be recommended; the "
                         "failed points' errors are in the cache folder")
    meeting = [row for row in rows if not _shortfalls(row, constraints)[0]]
    if meeting:
        return min(meeting, key=_preference)
    nearest = min(rows, key=lambda row: (_shortfalls(row, constraints)[1], _preference(row)))
    missed, _ = _shortfalls(nearest, constraints)
    raise InputError(f"no point meets the constraints; nearest: {point_label(nearest)} "
                     f"({'; '.join(missed)}); the finished points are kept for the next run")
