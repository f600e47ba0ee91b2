"""report.html and report.md: self-contained, made from the same data as report.json."""

import json
import re
import xml.etree.ElementTree as ElementTree
from html.parser import HTMLParser

import pytest

from test_cli import run
from test_fit_cli import HEADER, separable_rows, write_csv

VOID = {"meta", "br", "img", "hr", "link", "input"}


class Structure(HTMLParser):
    """Checks that tags nest (HTML5 void elements aside) and collects what a page loads."""

    def __init__(self):
        super().__init__()
        self.stack, self.errors, self.loads, self.tags = [], [], [], set()

    def handle_starttag(self, tag, attrs):
        self.tags.add(tag)
        for key, value in attrs:
            if key in ("src", "href") and value:
                self.loads.append(value)
        if tag not in VOID:
            self.stack.append(tag)

    def handle_startendtag(self, tag, attrs):
        self.tags.add(tag)

    def handle_endtag(self, tag):
        if not self.stack or self.stack[-1] != tag:
            self.errors.append(f"</{tag}> closes {self.stack[-1] if self.stack else 'nothing'}")
        else:
            self.stack.pop()


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
        assert f"{node['name']} ({node['bits']} bits)" in text
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
