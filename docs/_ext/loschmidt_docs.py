"""Tables of the loschmidt documentation that are read from the code at build time.

Directives:

- ``.. loschmidt-statuses::`` the integration statuses (``loschmidt.STATUSES``, read by the package
  from the engine's single table in ``cpp/include/loschmidt/methods/status.hpp``) and whether each
  counts as a finished, trustworthy run (``loschmidt.status.SUCCESS_STATUSES``).
- ``.. loschmidt-precisions::`` the working precisions: limbs, decimal digits, unit roundoff and
  default tolerance from ``loschmidt.precision`` and ``loschmidt.DEFAULT_TOLERANCE``, with the
  measured cost of one force evaluation relative to ``f64`` (``RELATIVE_COST`` below).
- ``.. loschmidt-api-names::`` every name in ``loschmidt.__all__``, its kind, where it is
  documented and the first line of its documentation.
"""

from __future__ import annotations

import inspect
import re
from typing import Any

from docutils import nodes
from docutils.statemachine import StringList
from sphinx.pycode import ModuleAnalyzer
from sphinx.util.docutils import SphinxDirective

#: Cost of one force evaluation relative to f64, from the benchmark suite (``python -m benchmarks``,
#: "cost per force evaluation", full run on the 2-core development machine; README, Benchmarks).
#: f64c evaluates forces with the f64 kernel (``precision._KERNEL``); only its state update is
#: compensated, so its cost per evaluation is that of f64 (measured on the Pythagorean problem,
#: gbs at tol 1e-13: 48 ns per evaluation for both).
RELATIVE_COST = {"f64": "1", "f64c": "about 1 (the f64 kernel)", "dd": "3.6", "qd": "102"}

#: What each precision is (the README's "Precisions" table).
REPRESENTATION = {
    "f64": "IEEE double",
    "f64c": "double with compensated (Kahan-Neumaier) state updates",
    "dd": "double-double (Dekker 1971; Joldes, Muller & Popescu 2017)",
    "qd": "quad-double (Hida, Li & Bailey 2001)",
}

#: Module in which each kind of top-level constant is documented, when it has no ``__module__``.
_HOMES = ("loschmidt.precision", "loschmidt.integrate", "loschmidt.status", "loschmidt.outcome")


def _cell(text: str) -> str:
    return " ".join(str(text).split())


def _list_table(header: list[str], rows: list[list[str]], widths: str | None = None) -> list[str]:
    lines = [".. list-table::", "   :header-rows: 1"]
    if widths:
        lines.append(f"   :widths: {widths}")
    lines.append("")
    for row in [header, *rows]:
        first = True
        for cell in row:
            lines.append(("   * - " if first else "     - ") + (_cell(cell) or r"\ "))
            first = False
    return lines


class _TableDirective(SphinxDirective):
    has_content = False

    def lines(self) -> list[str]:  # pragma: no cover - overridden
        raise NotImplementedError

    def run(self) -> list[nodes.Node]:
        container = nodes.container()
        self.state.nested_parse(StringList(self.lines(), source="loschmidt_docs"), self.content_offset, container)
        return container.children


class StatusTable(_TableDirective):
    """The integration statuses, from ``loschmidt.STATUSES``."""

    def lines(self) -> list[str]:
        import loschmidt
        from loschmidt.status import SUCCESS_STATUSES

        rows = []
        for code in sorted(loschmidt.STATUSES):
            name, message = loschmidt.STATUSES[code]
            ok = "yes" if name in SUCCESS_STATUSES else "no"
            rows.append([str(code), f"``{name}``", ok, message])
        return _list_table(["code", "status", "trustworthy result (``Result.success``)", "meaning"], rows,
                           "6 18 16 60")


class PrecisionTable(_TableDirective):
    """The working precisions, from ``loschmidt.precision`` and ``loschmidt.DEFAULT_TOLERANCE``."""

    def lines(self) -> list[str]:
        import loschmidt
        from loschmidt import precision as p

        rows = []
        for name in loschmidt.PRECISIONS:
            rows.append([
                f"``{name}``",
                REPRESENTATION.get(name, ""),
                str(p.limb_count(name)),
                str(p.digits(name)),
                f"{p.epsilon(name):.1e}",
                f"{loschmidt.DEFAULT_TOLERANCE[name]:.0e}",
                RELATIVE_COST.get(name, "not measured"),
            ])
        return _list_table(
            ["name", "representation", "limbs", "decimal digits", "unit roundoff", "default ``tol``",
             "cost per force evaluation (f64 = 1)"],
            rows, "8 32 8 10 12 12 18")


def _home(name: str, obj: Any) -> str:
    """The module in which a top-level name of the package is documented."""
    mod = getattr(obj, "__module__", None)
    if inspect.ismodule(obj):
        return obj.__name__
    if isinstance(mod, str) and mod.startswith("loschmidt.") and (inspect.isclass(obj) or callable(obj)):
        return mod
    import importlib

    for home in _HOMES:
        m = importlib.import_module(home)
        if name in getattr(m, "__all__", ()) and getattr(m, name) is obj:
            return home
    return "loschmidt"


def _summary(doc: str | None) -> str:
    """The first sentence of the first paragraph of a docstring or doc comment."""
    if not doc:
        return ""
    for para in inspect.cleandoc(doc).split("\n\n"):
        text = " ".join(para.split())
        if text:
            return re.split(r"(?<=\.)\s+(?=[A-Z])", text, maxsplit=1)[0]
    return ""


def _attribute_doc(module: str, name: str) -> str:
    analyzer = ModuleAnalyzer.for_module(module)
    docs = analyzer.find_attr_docs()
    lines = docs.get(("", name))
    return _summary("\n".join(lines)) if lines else ""


class ApiNames(_TableDirective):
    """Every name of ``loschmidt.__all__`` with a link to its documentation."""

    def lines(self) -> list[str]:
        import loschmidt

        rows = []
        for name in loschmidt.__all__:
            obj = getattr(loschmidt, name)
            home = _home(name, obj)
            if name == "__version__":
                rows.append(["``__version__``", "data", "the installed version", f"``{loschmidt.__version__}``"])
                continue
            if inspect.ismodule(obj):
                kind, role, target = "module", "mod", obj.__name__
                summary = _summary(obj.__doc__)
            elif inspect.isclass(obj):
                kind, role, target = "class", "class", f"{home}.{name}"
                summary = _summary(obj.__doc__)
            elif callable(obj):
                kind, role, target = "function", "func", f"{home}.{name}"
                summary = _summary(obj.__doc__)
            else:
                kind, role, target = "data", "data", f"{home}.{name}"
                summary = _attribute_doc(home, name)
            rows.append([f":py:{role}:`loschmidt.{name} <{target}>`", kind, f":py:mod:`{home}`", summary])
        return _list_table(["name", "kind", "documented in", "summary"], rows, "26 10 22 42")


_GROUPED = re.compile(r"^(\w+(?:\s*,\s*\w+)+)(\s*:.*)?$")


def split_grouped_attributes(app: Any, what: str, name: str, obj: Any, options: Any, lines: list[str]) -> None:
    """Write ``a, b : type`` entries of an Attributes section as one entry per name.

    napoleon splits grouped names in Parameters sections by itself but renders a grouped entry of
    an Attributes section (as instance variables) under the last name only; this runs first and
    gives every name the entry's type and description, as napoleon does for parameters.
    """
    out: list[str] = []
    i = 0
    in_attributes = False
    while i < len(lines):
        line = lines[i]
        if i + 1 < len(lines) and re.fullmatch(r"-{3,}", lines[i + 1].strip() or "x"):
            in_attributes = line.strip() == "Attributes"
            out.extend([line, lines[i + 1]])
            i += 2
            continue
        m = _GROUPED.match(line) if in_attributes else None
        if m:
            body = []
            j = i + 1
            while j < len(lines) and (not lines[j].strip() or lines[j].startswith((" ", "\t"))):
                if not lines[j].strip() and (j + 1 >= len(lines) or not lines[j + 1].startswith((" ", "\t"))):
                    break
                body.append(lines[j])
                j += 1
            for field in (f.strip() for f in m.group(1).split(",")):
                out.append(field + (m.group(2) or ""))
                out.extend(body)
            i = j
            continue
        out.append(line)
        i += 1
    lines[:] = out


def setup(app: Any) -> dict:
    app.connect("autodoc-process-docstring", split_grouped_attributes, priority=400)
    app.add_directive("loschmidt-statuses", StatusTable)
    app.add_directive("loschmidt-precisions", PrecisionTable)
    app.add_directive("loschmidt-api-names", ApiNames)
    return {"version": "1", "parallel_read_safe": True, "parallel_write_safe": True}
