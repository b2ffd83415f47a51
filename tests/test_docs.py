"""The documentation: the Sphinx build passes with warnings as errors, every public name is in the API
reference, the generated tables match the code, and every docstring and page example runs.

The examples are checked against what they print (doctest); their values come from the code under
test or from exact results named beside them in the docstrings (e.g. E = -769/60 for Burrau's
problem, Szebehely & Peters 1967).
"""

from __future__ import annotations

import doctest
import html
import importlib
import inspect
import re
import subprocess
import sys
import zlib
from pathlib import Path

import pytest

import loschmidt

ROOT = Path(__file__).resolve().parents[1]
DOCS = ROOT / "docs"

#: The public modules; each is documented on its own page of the API reference.
PUBLIC_MODULES = (
    "system", "integrate", "options", "engine", "status", "precision", "chaos", "ics", "ensemble", "orbits", "units",
    "outcome", "scattering", "events", "batch", "sweep", "tasks", "store", "plots", "report", "serialize",
)

FLAGS = doctest.NORMALIZE_WHITESPACE | doctest.ELLIPSIS


def _module(name: str):
    # importlib, not attribute access: loschmidt.integrate and loschmidt.outcome are functions there
    return importlib.import_module(f"loschmidt.{name}")


def _inventory(path: Path) -> dict[str, str]:
    """Full name -> role of every object in a Sphinx objects.inv (format version 2)."""
    data = path.read_bytes()
    lines = data.split(b"\n", 4)
    assert lines[0].startswith(b"# Sphinx inventory version 2")
    body = zlib.decompress(lines[4]).decode()
    out = {}
    for line in body.splitlines():
        m = re.match(r"(.+?)\s+(\S+:\S+)\s+(-?\d+)\s+(\S*)\s+(.*)$", line)
        if m:
            out[m.group(1)] = m.group(2)
    return out


@pytest.fixture(scope="module")
def built(tmp_path_factory: pytest.TempPathFactory) -> Path:
    pytest.importorskip("sphinx")
    out = tmp_path_factory.mktemp("docs")
    proc = subprocess.run(
        [sys.executable, "-m", "sphinx", "-W", "--keep-going", "-q", "-b", "html", "-d", str(out / "doctrees"),
         str(DOCS), str(out / "html")],
        cwd=ROOT, capture_output=True, text=True, timeout=300,
    )
    assert proc.returncode == 0, f"sphinx-build -W failed:\n{proc.stdout}\n{proc.stderr}"
    return out / "html"


def test_build_has_every_public_name(built: Path) -> None:
    inv = _inventory(built / "objects.inv")
    missing = []
    for name in PUBLIC_MODULES:
        mod = _module(name)
        if f"loschmidt.{name}" not in inv:
            missing.append(f"loschmidt.{name}")
        for member in mod.__all__:
            if f"loschmidt.{name}.{member}" not in inv:
                missing.append(f"loschmidt.{name}.{member}")
    # the package's own names, each documented in a public module that exports the same object
    for member in loschmidt.__all__:
        obj = getattr(loschmidt, member)
        if member == "__version__" or inspect.ismodule(obj):
            continue
        homes = [f"loschmidt.{m}.{member}" for m in PUBLIC_MODULES
                 if member in _module(m).__all__ and getattr(_module(m), member) is obj]
        if not any(h in inv for h in homes):
            missing.append(f"loschmidt.{member}")
    assert not missing, f"not in the API reference: {missing}"


def _table_cells(page: Path) -> list[list[str]]:
    """The text of every table row's cells in a built HTML page (quotes un-smartened)."""
    text = page.read_text(encoding="utf-8")
    rows = re.findall(r"<tr[^>]*>(.*?)</tr>", text, flags=re.S)
    out = []
    for row in rows:
        cells = re.findall(r"<td[^>]*>(.*?)</td>", row, flags=re.S)
        out.append([" ".join(html.unescape(re.sub(r"<[^>]+>", "", c)).replace("\u2019", "'").split()) for c in cells])
    return out


def test_generated_tables_match_the_code(built: Path) -> None:
    from loschmidt.status import SUCCESS_STATUSES

    table = {int(c[0]): c[1:] for c in _table_cells(built / "statuses.html") if len(c) == 4 and c[0].isdigit()}
    assert set(table) == set(loschmidt.STATUSES)
    for code, (name, message) in loschmidt.STATUSES.items():
        assert table[code][0] == name
        assert table[code][1] == ("yes" if name in SUCCESS_STATUSES else "no")
        assert table[code][2] == " ".join(message.split())

    table = {c[0]: c for c in _table_cells(built / "precisions.html") if c and c[0] in loschmidt.PRECISIONS}
    assert set(table) == set(loschmidt.PRECISIONS)
    for name, row in table.items():
        assert int(row[2]) == loschmidt.precision.limb_count(name)
        assert int(row[3]) == loschmidt.precision.digits(name)
        assert float(row[4]) == pytest.approx(loschmidt.precision.epsilon(name), rel=0.05)
        assert float(row[5]) == loschmidt.DEFAULT_TOLERANCE[name]


def _public_callables():
    for name in PUBLIC_MODULES:
        mod = _module(name)
        for member in mod.__all__:
            obj = getattr(mod, member)
            if inspect.isfunction(obj):
                yield f"loschmidt.{name}.{member}", obj
            elif inspect.isclass(obj) and obj.__module__ == mod.__name__:
                yield f"loschmidt.{name}.{member}", obj
                for attr, value in vars(obj).items():
                    if attr.startswith("_"):
                        continue
                    if isinstance(value, (classmethod, staticmethod)):
                        value = value.__func__
                    if inspect.isfunction(value) or isinstance(value, property):
                        yield f"loschmidt.{name}.{member}.{attr}", value


def _parameters(obj) -> list[str]:
    try:
        sig = inspect.signature(obj)
    except (TypeError, ValueError):
        return []
    return [p for p in sig.parameters if p not in ("self", "cls")]


def test_every_public_name_has_a_numpy_style_docstring() -> None:
    problems = []
    for full, obj in _public_callables():
        doc = inspect.cleandoc(obj.__doc__ or "") if isinstance(obj, property) else inspect.getdoc(obj)
        if not doc or not doc.strip():
            problems.append(f"{full}: no docstring")
            continue
        if isinstance(obj, property) or inspect.isclass(obj):
            continue  # a summary suffices; class parameters are checked where the class takes them
        if _parameters(obj) and not re.search(r"^Parameters\n-{10}$", doc, flags=re.M):
            problems.append(f"{full}: no 'Parameters' section")
    for name in PUBLIC_MODULES:
        if not (_module(name).__doc__ or "").strip():
            problems.append(f"loschmidt.{name}: no module docstring")
    assert not problems, "\n".join(problems)


def test_docstring_examples_run() -> None:
    from loschmidt import sweep

    tasks = dict(sweep._TASKS)  # an example registers a task: leave the registry as it was
    results = {}
    try:
        for name in ("",) + tuple(f".{m}" for m in PUBLIC_MODULES):
            mod = importlib.import_module(f"loschmidt{name}")
            results[mod.__name__] = doctest.testmod(mod, optionflags=FLAGS, report=True)
    finally:
        sweep._TASKS.clear()
        sweep._TASKS.update(tasks)
    failed = {k: r.failed for k, r in results.items() if r.failed}
    assert not failed, f"docstring examples failed: {failed}"
    attempted = sum(r.attempted for r in results.values())
    assert attempted >= 200, attempted
    for entry in ("system", "integrate", "chaos", "precision", "orbits", "ics", "units", "sweep", "batch"):
        assert results[f"loschmidt.{entry}"].attempted > 0, f"loschmidt.{entry} has no examples"


def test_page_examples_run() -> None:
    pages = sorted(DOCS.glob("*.rst"))
    assert pages
    attempted = 0
    for page in pages:
        result = doctest.testfile(str(page), module_relative=False, optionflags=FLAGS, encoding="utf-8")
        assert result.failed == 0, f"{page.name}: {result.failed} examples failed"
        attempted += result.attempted
    assert attempted >= 30, attempted
