"""Boolector on SMT-LIB queries: one query, or many lemmas in batches on every core."""

import os
import re
import time
from concurrent.futures import ThreadPoolExecutor

from ..errors import ToolError
from ..tools import ToolTimeout, run

__all__ = ["solve", "solve_batches", "BATCH_LEMMAS"]

BATCH_LEMMAS = 48


def solve(boolector, text, folder, name, timeout_s, values=()):
    """'unsat', 'sat' with the values asked for, or 'unknown' (timeout)."""
    body = ["(set-option :produce-models true)", "(set-logic QF_UFBV)", text, "(check-sat)"]
    if values:
        body.append("(get-value (" + " ".join(values) + "))")
    (folder / name).write_text("\n".join(body) + "\n", encoding="utf-8")
    try:
        result = run([boolector, "--smt2", f"--time={max(1, int(timeout_s))}", name], folder,
                     timeout=timeout_s + 10)
    except ToolTimeout:
        return "unknown", {}
    out = result.stdout
    first = out.split(None, 1)[0] if out.strip() else ""
    if first not in ("sat", "unsat", "unknown"):
        error = (result.stderr or out).strip().splitlines()
        raise ToolError(f"Boolector failed: "
                        f"{error[0] if error else 'exit ' + str(result.returncode)}")
    found = {}
    for key, val in re.findall(r"\((\|[^|]*\||\S+)\s+(#b[01]+|true|false)\)", out):
        found[key] = val
    return first, found


def solve_batches(boolector, common, lemmas, folder, deadline, hard=frozenset()):
    """Check the lemmas in batches, in parallel: after the cuts each lemma reads only free
    values, so the conjunction holds exactly when every batch does, and small queries are far
    cheaper for the solver than one large one. Returns ('unsat' | 'sat' | 'unknown', the
    labels of failing lemmas).

    Neighbouring lemmas share a batch (their cones overlap), at least a batch a core; the
    lemmas labelled in ``hard`` (a loadable weight's product: a multiplier the solver matches
    bit by bit, at a cost that grows faster than the batch) are dealt round the batches."""
    easy = [lemma for lemma in lemmas if lemma[0] not in hard]
    count = max(-(-len(lemmas) // BATCH_LEMMAS), min(len(lemmas), os.cpu_count() or 1))
    size = max(1, -(-len(easy) // count))
    batches = [easy[i * size:(i + 1) * size] for i in range(count)]
    for number, lemma in enumerate(lemma for lemma in lemmas if lemma[0] in hard):
        batches[number % count].append(lemma)
    batches = [batch for batch in batches if batch]

    def one(number):
        batch = batches[number]
        labels = [f"|t2h ok {i}|" for i in range(len(batch))]
        text = [common] + [f"(define-fun {label} () Bool {body})"
                           for label, (_, body) in zip(labels, batch)]
        text.append("(assert (not (and " + " ".join(labels) + " true)))")
        left = deadline - time.perf_counter()
        if left <= 0:
            return "unknown", []
        answer, values = solve(boolector, "\n".join(text), folder, f"lemmas{number}.smt2",
                               left, labels)
        return answer, [lemma for (lemma, _), label in zip(batch, labels)
                        if values.get(label) == "false"]

    workers = max(1, min(len(batches), os.cpu_count() or 1))
    with ThreadPoolExecutor(max_workers=workers) as pool:
        answers = list(pool.map(one, range(len(batches))))
    failing = [lemma for _, found in answers for lemma in found]
    kinds = {answer for answer, _ in answers}
    if "sat" in kinds:
        return "sat", failing
    return ("unknown" if "unknown" in kinds else "unsat"), failing
