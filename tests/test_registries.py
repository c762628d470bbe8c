"""The one tables that several places loop over: every entry complete, every place in step.

A balance class or a chart field added without what every output needs (a display name, a
colour, a ratio column; a label, a colour scale, a way to make its values) fails here,
before it is drawn grey or left out of a table somewhere.
"""

import re

import pytest

from app import fields, report_files
from app.desk import archive, systems
from app.state import FIELDS, ViewState
from balance_core.verdict import CANDIDATES, CLASSES
from balance_core.vocabulary import BALANCE_CLASSES, BALANCE_NAMES, TERM_NAMES


@pytest.mark.parametrize("b", BALANCE_CLASSES, ids=[b.name for b in BALANCE_CLASSES])
def test_every_balance_class_is_complete(b):
    assert re.fullmatch(r"[a-z]+", b.name)
    assert b.display and b.display[0].isupper()
    assert re.fullmatch(r"#[0-9A-Fa-f]{6}", b.colour), b.colour
    if b.terms is not None:  # a candidate balance: terms of the budget, and a column
        assert b.column == f"ratio_{b.name}"
        assert set(b.terms) <= set(TERM_NAMES) and "pressure_gradient" in b.terms


def test_every_place_loops_over_the_balance_classes():
    names = [b.name for b in BALANCE_CLASSES]
    assert len(set(names)) == len(names)
    assert len({b.colour for b in BALANCE_CLASSES}) == len(names)  # told apart on the chart
    assert list(CLASSES) == names and set(BALANCE_NAMES) == set(names)
    assert list(CANDIDATES) == [b.name for b in BALANCE_CLASSES if b.terms]
    assert systems.VERDICT_COLOURS == {b.name: b.colour for b in BALANCE_CLASSES}
    assert {name for name, _ in archive.RATIOS.values()} == set(CANDIDATES)
    out = {
        "case": "c",
        "level_hpa": 500.0,
        "level": 500.0,
        "valid_time": "2041-01-19T00:00:00Z",
        "systems": [],
    }
    header = report_files.systems_csv(out).splitlines()[0].split(",")
    assert {f"ratio_{c}" for c in CANDIDATES} <= set(header)
    legend = systems.legend_html()
    assert all(b.display in legend for b in BALANCE_CLASSES)


@pytest.mark.parametrize("f", fields.CHART_FIELDS, ids=[f.key for f in fields.CHART_FIELDS])
def test_every_chart_field_is_complete(f):
    assert f.label and f.scale in ("sequential", "diverging", "log", "classes") and callable(f.make)


def test_the_link_and_the_menu_take_the_fields_of_the_one_table():
    assert list(FIELDS) == [f.key for f in fields.CHART_FIELDS]
    assert list(ViewState.param["field"].objects) == list(FIELDS)


def _tree_files():
    import pathlib
    import subprocess

    root = pathlib.Path(__file__).resolve().parents[1]
    listed = subprocess.run(
        ["git", "ls-files", "*.py", "Makefile", ".ci/*"],
        cwd=root,
        capture_output=True,
        text=True,
        check=False,
    ).stdout.split()
    if not listed:  # not a git checkout: every Python file of ours
        listed = [str(p.relative_to(root)) for p in root.glob("[!.]*/**/*.py")]
    return root, listed


def test_every_environment_variable_is_in_the_settings_table_and_the_readme():
    from balance_core.settings import SETTINGS

    root, files = _tree_files()
    used = set()
    for name in files:
        text = (root / name).read_text(encoding="utf-8", errors="replace")
        used |= set(re.findall(r"BALANCE_DESK_[A-Z0-9_]+", text))
    assert used, "no BALANCE_DESK_ variable found: the search is broken"
    assert used <= set(SETTINGS), sorted(used - set(SETTINGS))
    readme = (root / "README.md").read_text(encoding="utf-8")
    missing = [n for n in SETTINGS if f"| `{n}` |" not in readme]
    assert not missing, f"not in the README's settings table: {missing}"


def test_only_the_settings_module_reads_the_environment_for_our_variables():
    root, files = _tree_files()
    readers = [
        name
        for name in files
        if name.endswith(".py")
        and not name.startswith(("tests/", "bench/"))
        and re.search(r"environ(\.get)?[\[(]\s*\"BALANCE_DESK_", (root / name).read_text())
    ]
    assert readers == [], readers


def test_a_setting_that_cannot_be_used_is_refused_by_name():
    from balance_core import settings

    env = {"BALANCE_DESK_NOTES_PER_MINUTE": "0", "BALANCE_DESK_LOG": "LOUD"}
    with pytest.raises(settings.SettingError, match="BALANCE_DESK_NOTES_PER_MINUTE"):
        settings.whole_number("BALANCE_DESK_NOTES_PER_MINUTE", env)
    with pytest.raises(settings.SettingError, match="BALANCE_DESK_LOG"):
        settings.log_level(env=env)
    with pytest.raises(settings.SettingError, match="BALANCE_DESK_BATCH_NO_WORKER_S"):
        settings.seconds("BALANCE_DESK_BATCH_NO_WORKER_S", {"BALANCE_DESK_BATCH_NO_WORKER_S": "x"})
    assert settings.whole_number("BALANCE_DESK_NOTES_PER_MINUTE", {}) == 20
    assert settings.log_level(env={}) == 20  # logging.INFO
    assert settings.text("BALANCE_DESK_STORE", {"BALANCE_DESK_STORE": "  "}) is None


def test_every_test_that_drives_chromium_carries_the_browser_mark():
    """`-m "not browser"` must leave out every test that starts Chromium: one that uses the
    ``browser`` fixture or calls ``launched()`` is marked, itself or by its module."""
    import ast

    root, files = _tree_files()
    unmarked = []
    for name in files:
        if not (name.startswith("tests/test_") and name.endswith(".py")):
            continue
        tree = ast.parse((root / name).read_text(encoding="utf-8"))
        module_marked = "pytest.mark.browser" in ast.unparse(
            [
                n
                for n in tree.body
                if isinstance(n, ast.Assign)
                and any(getattr(t, "id", "") == "pytestmark" for t in n.targets)
            ]
            or ast.Pass()
        )
        for fn in tree.body:
            if not (isinstance(fn, ast.FunctionDef) and fn.name.startswith("test_")):
                continue
            calls = [
                getattr(c.func, "id", getattr(c.func, "attr", ""))
                for c in ast.walk(fn)
                if isinstance(c, ast.Call)
            ]
            drives = "browser" in [a.arg for a in fn.args.args] or "launched" in calls
            marked = any("browser" in ast.unparse(d) for d in fn.decorator_list)
            if drives and not (module_marked or marked):
                unmarked.append(f"{name}::{fn.name}")
    assert unmarked == [], unmarked


def _top_level_imports(folder):
    """Every top-level module a folder's Python files import by absolute name."""
    import ast
    import pathlib

    found = {}
    for path in pathlib.Path(folder).rglob("*.py"):
        for node in ast.walk(ast.parse(path.read_text())):
            if isinstance(node, ast.Import):
                names = [a.name for a in node.names]
            elif isinstance(node, ast.ImportFrom) and node.level == 0 and node.module:
                names = [node.module]
            else:
                continue
            for name in names:
                found.setdefault(name.split(".")[0], str(path))
    return found


def _declared_distributions():
    """The distributions pyproject.toml names, in its dependencies and every extra."""
    import pathlib
    import tomllib

    project = tomllib.loads((pathlib.Path(__file__).parent.parent / "pyproject.toml").read_text())[
        "project"
    ]
    specs = list(project["dependencies"])
    for extra in project["optional-dependencies"].values():
        specs += extra
    return {re.split(r"[<>=!~ \[;]", s, maxsplit=1)[0].lower().replace("_", "-") for s in specs}


@pytest.mark.parametrize("folder", ["balance_core", "app", "testkit", "tests", "bench"])
def test_every_package_the_code_imports_is_declared(folder):
    """A package that arrives only as another's dependency can leave with it (colorcet did,
    when a plotting library was dropped); everything imported is named in pyproject.toml."""
    import importlib.metadata
    import pathlib
    import sys

    root = pathlib.Path(__file__).parent.parent
    ours = {p.name for p in root.iterdir() if p.is_dir()} | {
        p.stem for p in root.rglob("*.py") if ".venv" not in p.parts
    }
    owners = importlib.metadata.packages_distributions()
    declared = _declared_distributions()
    missing = {}
    for module, path in _top_level_imports(root / folder).items():
        if module in sys.stdlib_module_names or module in ours:
            continue
        dists = {d.lower().replace("_", "-") for d in owners.get(module, [module])}
        if not dists & declared:
            missing[module] = path
    assert not missing, f"imported but not declared in pyproject.toml: {missing}"


def test_every_report_carries_the_keys_its_type_names():
    """BoxReport and TermEntry (balance_core.report) are what the outputs read: a key added
    to one kind of report and not to its type (or the other kinds) fails here."""
    import os
    import typing

    import numpy as np

    from balance_core.io import analyze_case, diagnostics_for, open_case
    from balance_core.report import BoxReport, TermEntry, box_report, geostrophic_only_report
    from balance_core.verdict import VerdictDict

    case = open_case(os.path.join(os.path.dirname(__file__), "..", "sample_cases", "sea_breeze.nc"))
    shape = case.grid.lon.shape
    full = analyze_case(case, 850)
    empty = box_report(diagnostics_for(case, 0, 0), np.zeros(shape, bool))
    assert empty["points"] == 0 and full["points"] > 0
    only_g = geostrophic_only_report(
        case.grid, np.ones(shape), np.ones(shape), np.ones(shape, bool), "no wind"
    )
    names = set(typing.get_type_hints(BoxReport))
    for rep in (full, empty, only_g):
        assert names <= set(rep), names - set(rep)
        assert set(typing.get_type_hints(VerdictDict)) == set(rep["verdict"])
    assert set(only_g) == names
    for entry in full["terms"] + full["derived"]:
        assert set(entry) == set(typing.get_type_hints(TermEntry))
