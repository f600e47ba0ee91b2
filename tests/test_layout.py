"""The package's layout: a subpackage per stage of the flow, imports that run one way, modules
of one concern (short enough to read), and a contributor guide whose map matches the tree."""

import ast
import re
from pathlib import Path

# The source tree (an install adds the sim/ templates inside the package, which is no stage).
ROOT = Path(__file__).resolve().parents[1]
PACKAGE = ROOT / "thresh2hdl"
GUIDE = ROOT / "DEVELOPERS.md"

# The stages in the order data flows (DEVELOPERS.md "How data flows"): a module may import from
# its own subpackage and from stages ranked below its own, never from its own rank or above.
RANK = {"": 0, "model": 1, "train": 2, "analysis": 2, "hardware": 3, "emit": 4, "verify": 5,
        "proof": 5, "cost": 5, "reports": 6, "explore": 7, "app": 8}
MOST_LINES = 420      # "~400 lines at most" a module (DEVELOPERS.md)


def modules():
    for path in sorted(PACKAGE.rglob("*.py")):
        yield path, path.relative_to(PACKAGE)


def stage_of(relative):
    return relative.parts[0] if len(relative.parts) > 1 else ""


def imported_stages(path, relative):
    """The stage of every thresh2hdl module ``path`` imports (relative or absolute)."""
    here = relative.parts[:-1]
    for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
        if isinstance(node, ast.ImportFrom):
            if node.level:
                base = list(here[:len(here) - (node.level - 1)])
                parts = base + (node.module.split(".") if node.module else [])
                if not parts:      # "from .. import x": x may be a subpackage
                    for alias in node.names:
                        yield (alias.name if alias.name in RANK else ""), node.lineno
                    continue
            elif node.module and node.module.split(".")[0] == "thresh2hdl":
                parts = node.module.split(".")[1:]
            else:
                continue
            top = parts[0] if parts else ""
            yield (top if top in RANK else ""), node.lineno


def test_imports_run_one_way():
    wrong = []
    for path, relative in modules():
        if relative in (Path("__init__.py"), Path("__main__.py")):
            continue         # the public API and the entry point gather every stage
        stage = stage_of(relative)
        for other, line in imported_stages(path, relative):
            if other != stage and RANK[other] >= RANK[stage] and other != "":
                wrong.append(f"{relative}:{line} ({stage or 'base'}) imports {other}")
    assert not wrong, wrong


def test_every_subpackage_is_a_known_stage():
    found = {p.name for p in PACKAGE.iterdir() if (p / "__init__.py").is_file()}
    assert found == set(RANK) - {""}


def test_modules_are_short():
    long = [f"{relative}: {len(path.read_text().splitlines())} lines"
            for path, relative in modules()
            if len(path.read_text(encoding="utf-8").splitlines()) > MOST_LINES]
    assert not long, long


def guide_map():
    """The modules DEVELOPERS.md's map names: ``stage/module.py`` (``module.py`` for base)."""
    text = GUIDE.read_text(encoding="utf-8")
    start = text.index("## How data flows")
    section = text[start:text.index("\n## ", start + 1)]
    named, stage = set(), None
    for line in section.splitlines():
        head = re.match(r"    (base|[a-z]+/) ", line)
        if head:
            stage = "" if head[1] == "base" else head[1]
        elif not line.startswith("               "):
            stage = None     # prose between the map's lines
        if stage is not None:
            named.update(stage + name for name in re.findall(r"\b([a-z_]+\.py)\b", line))
    return named


def test_the_guide_maps_every_module_and_only_those():
    named = guide_map()
    actual = {relative.as_posix() for _, relative in modules()
              if relative.name not in ("__init__.py", "__main__.py")}
    assert actual - named == set(), f"modules the map does not name: {sorted(actual - named)}"
    assert named - actual == set(), f"the map names what is not there: {sorted(named - actual)}"


def test_tests_mirror_the_package_and_share_helpers_only_through_helpers_py():
    # A test module never imports another test module (a moved test must not break others):
    # what they share lives in tests/helpers.py. Each folder of tests is a stage of the package.
    tests = Path(__file__).parent
    stages = {p.name for p in tests.iterdir() if p.is_dir() and list(p.glob("test_*.py"))}
    assert stages <= set(RANK) - {""}, stages - set(RANK)
    wrong = []
    for path in sorted(tests.rglob("test_*.py")):
        for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
            names = [node.module or ""] if isinstance(node, ast.ImportFrom) else \
                [alias.name for alias in node.names] if isinstance(node, ast.Import) else []
            wrong += [f"{path.relative_to(tests)}:{node.lineno} imports {name}"
                      for name in names if name.split(".")[0].startswith("test_")]
    assert not wrong, wrong
