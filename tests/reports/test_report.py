"""report.html and report.md: self-contained, made from the same data as report.json."""

import json
import re
import xml.etree.ElementTree as ElementTree

import numpy as np
import pytest

from helpers import run, bank_model, HEADER, naf_weight, write_csv, separable_rows, Structure
from thresh2hdl.app import BuildOptions, build


@pytest.fixture(scope="module")
def built(tmp_path_factory):
    folder = tmp_path_factory.mktemp("report")
    data = write_csv(folder / "d.csv", HEADER, separable_rows(200))
    model = folder / "m.toml"
    assert run("fit", data, "--out", model, "--input-bits", "12").returncode == 0
    out = folder / "out"
    result = run("build", model, "--out", out, "--data", data, "--simulator", "amaranth",
                 "--vectors", "500")
    assert result.returncode == 0, result.stderr
    return out


def test_html_is_well_formed_and_self_contained(built):
    text = (built / "report.html").read_text()
    parser = Structure()
    parser.feed(text)
    assert parser.errors == [] and parser.stack == []
    assert parser.loads == []                       # no external resources
    assert "script" not in parser.tags
    links = re.findall(r"https?://[^\s\"']+", text)
    assert links == ["http://www.w3.org/2000/svg"] * text.count("<svg")
    for svg in re.findall(r"<svg.*?</svg>", text, flags=re.S):
        ElementTree.fromstring(svg)                 # every picture is valid XML (SVG)


def test_html_shows_the_report(built):
    report = json.loads((built / "report.json").read_text())
    text = (built / "report.html").read_text()
    assert "not a safety-rated function" in text
    assert report["model_sha256"] in text and report["tool_versions"]["thresh2hdl"] in text
    assert f"{report['vectors_checked']} vectors" in text
    assert text.count('aria-label="score histogram per class"') == 1
    assert "Confusion" in text
    assert 'aria-label="mistakes per epoch"' in text and report["training"]["log"] == "m.fit.json"
    for node in report["tree"]["nodes"]:
        assert f"<title>{node['name']}: {node['kind']}, {node['bits']} bits, " in text
    markdown = (built / "report.md").read_text()
    assert f"| mismatches | {report['mismatches']} |" in markdown
    assert f"| score port bits | {report['score_bits']} |" in markdown


def test_reports_are_deterministic(built, tmp_path):
    model = built.parent / "m.toml"
    data = built.parent / "d.csv"
    again = tmp_path / "again"
    assert run("build", model, "--out", again, "--data", data, "--simulator", "amaranth",
               "--vectors", "500").returncode == 0
    for name in ("report.html", "report.md"):
        assert (again / name).read_bytes() == (built / name).read_bytes()


# Identifiers the Verilog declares (ports, wires, registers): read here with a pattern of our
# own, not the project's, from the Verilog-2001 declaration syntax (IEEE 1364-2005, 12.3.3
# and 4.2).
DECLARED = re.compile(r"^\s*(?:\(\*[^*]*\*\)\s*)?(?:input|output|wire|reg)\s+(?:wire\s+|reg\s+)?"
                      r"(?:signed\s+)?(?:\[\d+:\d+\]\s*)?([A-Za-z_][A-Za-z0-9_]*)", re.M)
BANK_WEIGHTS = [[1, -2, 3, 4], [2, 2, -1, 0], [-3, 1, 1, 1], [0, 1, -1, 2], [2, 0, 0, -1]]
BANK_BIASES = [1, -2, 0, 5, -3]


@pytest.fixture(scope="module")
def bank_built(tmp_path_factory):
    """A bank of five units (an odd one carried up the argmax), three register stages, with
    labelled rows."""
    folder = tmp_path_factory.mktemp("bank_report")
    rng = np.random.default_rng(1)
    x = rng.integers(0, 64, (300, 4))
    labels = rng.integers(0, 5, 300)
    data = write_csv(folder / "rows.csv", ["f0", "f1", "f2", "f3", "label"],
                     [list(row) + [label] for row, label in zip(x, labels)])
    model = bank_model(BANK_WEIGHTS, BANK_BIASES, bits=6)
    built = build(model, folder / "out", BuildOptions(pipeline=3, simulator="amaranth",
                                                      vectors=300, data=str(data)))
    return built.out_dir, x, labels


def test_bank_nodes_are_named_as_in_the_verilog(bank_built):
    out, _, _ = bank_built
    report = json.loads((out / "report.json").read_text())
    declared = set(DECLARED.findall((out / report["verilog"]).read_text()))
    features = {f["name"] for f in report["features"]}
    units = [u["name"] for u in report["units"]]
    nodes = report["tree"]["nodes"]
    assert len({n["name"] for n in nodes}) == len(nodes)
    own = 0
    for node in nodes:
        assert node["name"].startswith(f"u{units.index(node['unit'])}_")
        if node["verilog"] == node["name"]:
            assert node["name"] in declared
            own += 1
        else:
            # A product by a power of two is the input itself, shifted: no wire of its own.
            shifted = re.fullmatch(r"([A-Za-z_]\w*)(?: << (\d+))?", node["verilog"])
            assert node["kind"] == "product" and shifted and shifted[1] in features
            assert node["name"] not in declared
    assert own >= len(nodes) // 2
    markdown = (out / "report.md").read_text()
    assert all(f"| {n['name']} | {n['level']} | {n['stage']} |" in markdown for n in nodes)


def test_bank_report_has_each_units_score_by_class(bank_built):
    out, x, labels = bank_built
    report = json.loads((out / "report.json").read_text())
    histograms = report["data"]["unit_histograms"]
    # The scores from a plain matrix product, independent of the reference model.
    scores = x @ np.array(BANK_WEIGHTS).T + np.array(BANK_BIASES)
    assert [h["unit"] for h in histograms] == [u["name"] for u in report["units"]]
    for k, histogram in enumerate(histograms):
        edges = np.array(histogram["edges"])
        own = np.histogram(scores[labels == k, k], bins=edges)[0].tolist()
        others = np.histogram(scores[labels != k, k], bins=edges)[0].tolist()
        assert histogram["counts"] == {f"class {k}": own, "other classes": others}
        assert sum(own) + sum(others) == len(x)
    assert report["data"]["score_seen"] == [float(scores.min()), float(scores.max())]
    text = (out / "report.html").read_text()
    for unit in report["units"]:
        assert text.count(f'aria-label="score histogram of unit {unit["name"]}"') == 1


def test_bank_report_shows_the_argmax_comparisons(bank_built):
    out, _, _ = bank_built
    report = json.loads((out / "report.json").read_text())
    tree = report["tree"]
    comparisons = tree["argmax"]
    # The tournament as documented: neighbours compared round by round, the lower indices on
    # the left, an odd last entry carried up; three rounds after the scores for five units,
    # each a level of comparisons and a level of selections.
    first = tree["levels"] - 6
    gold = [(first, ["0"], ["1"]), (first, ["2"], ["3"]),
            (first + 2, ["0", "1"], ["2", "3"]), (first + 4, ["0", "1", "2", "3"], ["4"])]
    assert [(c["level"], c["left_classes"], c["right_classes"]) for c in comparisons] == gold
    assert tree["level_names"][first:] == ["argmax comparisons", "argmax selections"] * 3
    for c in comparisons:
        stage = next(s for s in tree["stages"] if s["levels"][0] <= c["level"] <= s["levels"][1])
        assert c["stage"] == stage["stage"] and c["ties_to"] == "left"
    assert "u0_score_sum" in comparisons[0]["left"] and "u4_" in comparisons[-1]["right"]
    declared = set(DECLARED.findall((out / report["verilog"]).read_text()))
    for c in comparisons[:-1]:
        assert {f"{c['name']}_score", f"{c['name']}_class"} <= declared
    text = (out / "report.html").read_text()
    markdown = (out / "report.md").read_text()
    assert "<h3>Argmax</h3>" in text and "a tie goes to the lower class index" in text
    for c in comparisons:
        assert f"<td class=l>{c['name']}</td><td>{c['level']}</td><td>{c['stage']}</td>" in text
        assert f"| {c['name']} | {c['level']} | {c['stage']} |" in markdown


def test_register_stages_are_told_by_the_levels_they_follow(bank_built, built):
    for out in (bank_built[0], built):
        report = json.loads((out / "report.json").read_text())
        tree = report["tree"]
        stages = tree["stages"]
        assert len(stages) == report["register_stages"]
        assert len(tree["level_names"]) == tree["levels"]
        # The stages cover the levels 0 .. levels - 1 in order, each after its last level.
        assert stages[0]["levels"][0] == 0 and stages[-1]["levels"][1] == tree["levels"] - 1
        assert all(a["levels"][1] + 1 == b["levels"][0] for a, b in zip(stages, stages[1:]))
        assert tree["register_after_levels"] == [s["levels"][1] for s in stages]
        for node in tree["nodes"]:
            stage = stages[node["stage"] - 1]
            assert stage["levels"][0] <= node["level"] <= stage["levels"][1]
        text = (out / "report.html").read_text()
        spans = ", ".join(f"stage {s['stage']} after levels {s['levels'][0]}-{s['levels'][1]}"
                          if s["levels"][0] != s["levels"][1] else
                          f"stage {s['stage']} after level {s['levels'][0]}" for s in stages)
        assert spans in text and spans in (out / "report.md").read_text()
        assert f"<td class=l>levels</td><td>{tree['levels']} levels (0 products" in text


def svg_of(text, label):
    found = re.findall(rf'<svg[^>]*aria-label="{re.escape(label)}".*?</svg>', text, flags=re.S)
    assert len(found) == 1, label
    return ElementTree.fromstring(found[0])


def test_datapath_is_drawn_as_the_tree(bank_built, built):
    svg = "{http://www.w3.org/2000/svg}"
    drawn = 0
    for out in (built, bank_built[0]):
        report = json.loads((out / "report.json").read_text())
        text = (out / "report.html").read_text()
        assert "what the width can hold" not in text          # the range bars are gone
        units = [u["name"] for u in report.get("units", [])] or [None]
        for unit in units:
            nodes = [n for n in report["tree"]["nodes"] if n.get("unit") == unit]
            picture = svg_of(text, "datapath" if unit is None else f"unit {unit}")
            boxes = picture.findall(f"{svg}g[@class='node']")
            assert [b.find(f"{svg}title").text.split(":")[0] for b in boxes] == \
                [n["name"] for n in nodes]
            for box, node in zip(boxes, nodes):
                shown = "".join(box.itertext())
                assert f"{node['bits']} bits" in shown and \
                    f"[{node['range'][0]}, {node['range'][1]}]" in shown
            edges = picture.findall(f"{svg}path[@class='edge']")
            assert len(edges) == sum(len(n["children"]) for n in nodes) > 0
            # A dashed line after each level a register stage follows, within the picture.
            low, high = min(n["level"] for n in nodes), max(n["level"] for n in nodes)
            after = [s["levels"][1] for s in report["tree"]["stages"]]
            lines = len(picture.findall(f"{svg}line[@class='stage']"))
            assert lines == sum(1 for level in after if low <= level <= high)
            drawn += lines
    assert drawn >= 1


def test_a_tree_too_large_to_draw_is_left_to_the_tables(tmp_path):
    from thresh2hdl.model.records import FeatureFormat, Model, Unit
    from thresh2hdl.reports.html import TREE_PICTURE_MOST
    model = Model(module="wide", features=[FeatureFormat(f"x{i}", 8) for i in range(90)],
                  units=[Unit("u", tuple((i % 7) - 3 or 5 for i in range(90)), -10)])
    built = build(model, tmp_path / "out", BuildOptions(simulator="amaranth", vectors=50))
    nodes = built.report["tree"]["nodes"]
    assert len(nodes) > TREE_PICTURE_MOST
    text = (built.out_dir / "report.html").read_text()
    assert 'aria-label="datapath"' not in text and f"{len(nodes)} values, too many to draw" in text
    assert "<td class=l>0</td><td>products</td><td>90</td>" in text
    markdown = (built.out_dir / "report.md").read_text()
    assert all(f"| {n['name']} | {n['level']} |" in markdown for n in nodes)


def test_the_record_is_the_report_json_and_reads_a_unit_and_a_bank_alike(built, bank_built,
                                                                       tmp_path):
    from thresh2hdl.app import demo_model
    from thresh2hdl.reports.record import Report
    loadable = build(demo_model(), tmp_path / "w", BuildOptions(
        simulator="amaranth", vectors=50, loadable_weights=True, arch="serial"))
    for out in (built, bank_built[0], loadable.out_dir):
        text = (out / "report.json").read_text()
        data = json.loads(text)
        record = Report.from_json(data)
        # One conversion each way: the record writes report.json's data back, key for key
        # and in the same order, and reads its own JSON form back to itself.
        assert json.dumps(record.to_json()) == json.dumps(data)
        assert Report.from_json(record.to_json()) == record
        rows = record.sizes.units
        if "units" in data:
            assert [(u.name, list(u.weights), u.bias) for u in rows] == \
                [(u["name"], u["weights"], u["bias"]) for u in data["units"]]
            assert list(record.sizes.score_range) == [
                min(u["score_range"][0] for u in data["units"]),
                max(u["score_range"][1] for u in data["units"])] == data["score_range"]
        else:
            assert [(u.name, list(u.weights), u.bias) for u in rows] == \
                [(None, data["weights"], data["bias"])]
    assert loadable.report == json.loads((loadable.out_dir / "report.json").read_text())
    assert loadable.report["weight_port"]["ports"] == ["weight_write", "weight_address",
                                                       "weight_data"]


def _paths(value, path=()):
    """Every table, list and value of a JSON document (a list's first item standing for
    the rest), by its path."""
    if path:
        yield path
    if isinstance(value, dict):
        for key, item in value.items():
            yield from _paths(item, path + (key,))
    elif isinstance(value, list) and value:
        yield from _paths(value[0], path + (0,))


PROOF = {"status": "counterexample", "netlist": "x.v", "netlist_sha256": "ab", "statement": "s",
         "method": "m", "lemmas": 3, "solver": "Boolector", "yosys": "Yosys", "arithmetic_bits": 64,
         "timeout_s": 10, "detail": "d", "failing_lemmas": ["y"], "counterexample": {
             "vector": {"f0": 1}, "file": "c.csv", "confirmed_in": "Icarus", "mismatch": "m"}}
ESTIMATE = {"target": "ice40", "device": "--up5k --package sg48", "device_name": "UP5K",
            "lut4_equivalents": 9, "lut4_rule": "r", "luts": 9, "carries": 2, "flip_flops": 3,
            "dsps": 0, "dsp_inference": False, "placed": False, "fmax_mhz": None, "cells": {},
            "tool_versions": {"yosys": "Y", "nextpnr": "N"}, "method": "m", "does_not_fit": [
                {"resource": "logic cells", "cell": "ICESTORM_LC", "needed": 9, "available": 1}],
            "input_guard": {"lut4_equivalents": 2, "flip_flops": 1,
                            "without_guard": {"lut4_equivalents": 7}}}
QUANTIZATION = {"bits": 6, "agreement_with_float": 1.0, "accuracy": 0.9, "float_accuracy": 0.9,
                "sweep": [{"bits": 2, "agreement": 0.5, "accuracy": 0.4}], "recommended_bits": 2,
                "log": "m.quantize.json"}


def test_a_report_json_edited_past_showing_is_one_error_naming_the_field(built, bank_built,
                                                                          tmp_path):
    # Every table, list and value of a report (every section filled: data, training,
    # quantization, proofs, an estimate not placed) replaced by a value of another kind: the
    # report still shows, or reading it is one InputError naming the file and the field;
    # never another exception from inside a writer.
    from thresh2hdl.app.folder import report_files
    from thresh2hdl.errors import InputError
    source = tmp_path / "report.json"
    refused = re.compile(rf"^{re.escape(str(source))}: [^:]+: cannot show this report: must be "
                         rf".+; rebuild the folder$")
    for out in (built, bank_built[0]):
        report = json.loads((out / "report.json").read_text())
        # The proof as older reports hold it (no method_kind: the value lemmas), and a
        # gate-level netlist's proof by equivalence.
        report.update(quantization=QUANTIZATION, proof=PROOF,
                      netlist_proofs={"x.v": {**PROOF, "method_kind": "gate-equivalence"}},
                      estimates={"ice40": ESTIMATE})
        shown = report_files(tmp_path, report)
        assert "not placed" in shown[tmp_path / "report.md"]
        assert "(value-lemmas, 3 lemmas" in shown[tmp_path / "report.md"]
        assert "(gate-equivalence, 3 lemmas" in shown[tmp_path / "report.md"]
        assert json.loads(shown[tmp_path / "report.json"])["netlist_proofs"]["x.v"][
            "method_kind"] == "gate-equivalence"
        failures = 0
        for path in _paths(report):
            for value in (None, "x", -1, 0, 2.5, True, [], [0], {}):
                edited = json.loads(json.dumps(report))
                where = edited
                for key in path[:-1]:
                    where = where[key]
                where[path[-1]] = value
                try:
                    report_files(tmp_path, edited)
                except InputError as error:
                    assert refused.match(str(error)), (path, value, str(error))
                    failures += 1
        assert failures > 100


def test_every_report_states_the_signed_digits_of_the_weights(built, bank_built):
    # A lone unit and a bank: report.json, report.md, report.html and the terminal summary
    # give the weights' nonzero signed digits (per unit for a bank), counted here by definition.
    from thresh2hdl.reports import summary_lines
    for out, is_bank in ((built, False), (bank_built[0], True)):
        report = json.loads((out / "report.json").read_text())
        rows = report["units"] if is_bank else [report]
        per_unit = [sum(naf_weight(w) for w in row["weights"]) for row in rows]
        assert per_unit and report["signed_digits"] == sum(per_unit) > 0
        text = f"{sum(per_unit)} in all"
        if is_bank:
            assert [row["signed_digits"] for row in rows] == per_unit
            text += f" (per unit {', '.join(map(str, per_unit))})"
        assert f"| nonzero signed digits of the weights | {text} |" in (
            out / "report.md").read_text()
        assert f"nonzero signed digits of the weights</td><td>{text}</td>" in (
            out / "report.html").read_text()
        assert f"  weights: nonzero signed digits {text}" in summary_lines(report)
