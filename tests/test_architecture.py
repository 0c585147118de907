"""The import graph of gpctools, read with ``ast``: layers, private modules, cycles.

Every module of the package is parsed (nothing is imported or run) and every import
statement is collected, also those inside functions and under ``if TYPE_CHECKING:``.
Three rules, as drawn in the contributor guide (DEVELOPERS.md, "Architecture"):

(a) **no import cycles** between modules. Imports made only for type checking
    (under ``if TYPE_CHECKING:``) never run, so they do not count for cycles; they do
    count for (b) and (c), since a lower layer should not even know an upper layer's types.
(b) **private modules stay private**: a module whose name starts with ``_`` may be imported
    only by the modules of its own package (its siblings and the package ``__init__``).
    The top level is a package too: a ``gpctools._helpers`` would be private to the modules
    that sit directly in ``gpctools/``; importing it from ``gpctools.report`` is a violation.
(c) **data flows up**: each module belongs to a layer (``LAYERS`` below, lowest first) and
    imports only from its own layer or the layers below. Modules in the same layer may
    import each other (rule (a) keeps that one-way). A module that no layer claims is
    reported, so that a new module gets a place on purpose.

``simulate`` is a special case. It is the one generator of synthetic exports, series and
cases; to make them it may use every science layer up to transfer/kinetics (it sits just
above them), but it is a tool for the demo and the tests, not part of any computation:
only ``demo`` and ``cli`` may import it (``ONLY_IMPORTED_BY``). A science module that
imports the simulator would make its results depend on the demo's generator.

Violations that other work in progress is removing are listed in ``KNOWN_VIOLATIONS``
with a comment; the test fails on any violation not listed, and also on a listed one
that no longer occurs, so that the list only shrinks. Run this file directly
(``python tests/test_architecture.py``) to print the full report.
"""

from __future__ import annotations

import ast
import sys
from collections.abc import Iterable, Mapping, Sequence
from dataclasses import dataclass
from pathlib import Path

import pytest

# ============================================================================ the rules

#: Layers, lowest first. A module belongs to the layer of the longest entry that names it
#: or one of its parent packages (``gpctools.transfer`` claims ``gpctools.transfer.mayo``);
#: the root package's entry claims only the root ``__init__``. The order follows the
#: contributor guide's drawing with two changes the code asked for: ``method`` sits above
#: ``calibration``, because loading a method file fits its calibration, and above
#: ``detectors``, because it checks the ``[detectors]`` section with them.
LAYERS: tuple[tuple[str, ...], ...] = (
    ("gpctools", "gpctools.errors", "gpctools.templates"),  # metadata; starter files (package data)
    ("gpctools.columns", "gpctools.formatting", "gpctools.display"),  # vocabulary, number policy, repr mixin
    ("gpctools.io", "gpctools.sheets"),
    ("gpctools.signal", "gpctools.calibration"),
    ("gpctools.distribution", "gpctools.uncertainty"),
    ("gpctools.detectors",),  # multi-detector numerics: above distribution, below batch
    ("gpctools.method",),  # the method file checks its [detectors] section with gpctools.detectors
    ("gpctools.batch",),
    ("gpctools.chainlength", "gpctools.refdata"),
    ("gpctools.transfer", "gpctools.kinetics"),
    ("gpctools.simulate",),
    ("gpctools.qc",),
    ("gpctools.report",),
    ("gpctools.demo",),
    ("gpctools.cli",),
)

#: Modules that only the listed modules may import (see the module docstring).
ONLY_IMPORTED_BY: dict[str, tuple[str, ...]] = {
    "gpctools.simulate": ("gpctools.demo", "gpctools.cli"),
}

#: Violations being removed by work in progress (issue 8). Each entry is the violation's
#: key as printed by ``python tests/test_architecture.py``. Empty this list as they go:
#: the test fails on an entry that no longer occurs.
KNOWN_VIOLATIONS: frozenset[tuple[str, str, str]] = frozenset()


# ============================================================================ the checker


@dataclass(frozen=True)
class Import:
    """One import of a package module by another."""

    importer: str
    target: str
    path: Path
    line: int
    typing_only: bool


@dataclass(frozen=True)
class Violation:
    """A broken rule; ``key`` identifies it in ``KNOWN_VIOLATIONS``."""

    kind: str  # "cycle", "private", "layer", "restricted", "unplaced"
    importer: str
    target: str
    detail: str

    @property
    def key(self) -> tuple[str, str, str]:
        return (self.kind, self.importer, self.target)

    def __str__(self) -> str:
        return f"[{self.kind}] {self.detail}"


def find_modules(package_dir: Path) -> dict[str, tuple[Path, bool]]:
    """Module name -> (source file, is a package ``__init__``) for every ``.py`` file."""
    root_name = package_dir.name
    modules: dict[str, tuple[Path, bool]] = {}
    for path in sorted(package_dir.rglob("*.py")):
        parts = list(path.relative_to(package_dir).with_suffix("").parts)
        is_pkg = parts[-1] == "__init__"
        if is_pkg:
            parts = parts[:-1]
        modules[".".join([root_name, *parts])] = (path, is_pkg)
    return modules


def _is_type_checking(test: ast.expr) -> bool:
    return (isinstance(test, ast.Name) and test.id == "TYPE_CHECKING") or (
        isinstance(test, ast.Attribute) and test.attr == "TYPE_CHECKING")


def _walk(node: ast.AST, typing_only: bool = False) -> Iterable[tuple[ast.AST, bool]]:
    """Every node below ``node`` with a flag: inside an ``if TYPE_CHECKING:`` body."""
    for child in ast.iter_child_nodes(node):
        if isinstance(child, ast.If) and _is_type_checking(child.test):
            for stmt in child.body:
                yield stmt, True
                yield from _walk(stmt, True)
            for stmt in child.orelse:
                yield stmt, typing_only
                yield from _walk(stmt, typing_only)
        else:
            yield child, typing_only
            yield from _walk(child, typing_only)


def _absolute(module: str, is_pkg: bool, level: int, name: str | None) -> str:
    """The absolute module named by a (possibly relative) ``from ... import``."""
    if level == 0:
        return name or ""
    base = module.split(".") if is_pkg else module.split(".")[:-1]
    if level > 1:
        base = base[: len(base) - (level - 1)]
    return ".".join(base + ([name] if name else []))


def collect_imports(package_dir: Path) -> tuple[dict[str, tuple[Path, bool]], list[Import]]:
    """Parse every module and return the imports between modules of the package."""
    modules = find_modules(package_dir)
    root = package_dir.name
    imports: list[Import] = []

    def inside(name: str) -> bool:
        return name == root or name.startswith(root + ".")

    def owner(name: str) -> str | None:
        """The module a dotted name refers to (``gpctools.io.read_sheet`` -> ``gpctools.io``)."""
        while name and name not in modules:
            name = name.rpartition(".")[0]
        return name or None

    for module, (path, is_pkg) in modules.items():
        tree = ast.parse(path.read_text(encoding="utf-8"), filename=str(path))
        for node, typing_only in _walk(tree):
            targets: list[str] = []
            if isinstance(node, ast.Import):
                targets = [a.name for a in node.names if inside(a.name)]
            elif isinstance(node, ast.ImportFrom):
                base = _absolute(module, is_pkg, node.level, node.module)
                if not inside(base):
                    continue
                for alias in node.names:  # ``from pkg import submodule`` names the submodule
                    sub = f"{base}.{alias.name}"
                    targets.append(sub if sub in modules else base)
            for t in targets:
                target = owner(t)
                if target is not None and target != module:
                    imports.append(Import(module, target, path, node.lineno, typing_only))
    return modules, imports


def layer_of(module: str, layers: Sequence[Sequence[str]]) -> int | None:
    """Index of the layer whose longest entry claims ``module`` (None: unplaced).

    An entry claims the module it names and, unless it is the root package (a name
    without a dot), every module below it.
    """
    best, best_len = None, -1
    for index, names in enumerate(layers):
        for name in names:
            below = "." in name and module.startswith(name + ".")
            if (module == name or below) and len(name) > best_len:
                best, best_len = index, len(name)
    return best


def _package(module: str, is_pkg: bool) -> str:
    return module if is_pkg else module.rpartition(".")[0]


def _where(imp: Import, package_dir: Path) -> str:
    return f"{imp.path.relative_to(package_dir.parent)}:{imp.line}"


def _cycles(modules: Iterable[str], edges: Mapping[str, set[str]]) -> list[list[str]]:
    """Strongly connected components with more than one module (Tarjan, iterative)."""
    index: dict[str, int] = {}
    low: dict[str, int] = {}
    on_stack: set[str] = set()
    stack: list[str] = []
    found: list[list[str]] = []
    counter = 0
    for start in sorted(modules):
        if start in index:
            continue
        work = [(start, iter(sorted(edges.get(start, ()))))]
        index[start] = low[start] = counter
        counter += 1
        stack.append(start)
        on_stack.add(start)
        while work:
            node, it = work[-1]
            advanced = False
            for nxt in it:
                if nxt not in index:
                    index[nxt] = low[nxt] = counter
                    counter += 1
                    stack.append(nxt)
                    on_stack.add(nxt)
                    work.append((nxt, iter(sorted(edges.get(nxt, ())))))
                    advanced = True
                    break
                if nxt in on_stack:
                    low[node] = min(low[node], index[nxt])
            if advanced:
                continue
            work.pop()
            if work:
                low[work[-1][0]] = min(low[work[-1][0]], low[node])
            if low[node] == index[node]:
                component = []
                while True:
                    m = stack.pop()
                    on_stack.discard(m)
                    component.append(m)
                    if m == node:
                        break
                if len(component) > 1:
                    found.append(sorted(component))
    return sorted(found)


def check_import_graph(
    package_dir: Path,
    layers: Sequence[Sequence[str]] = LAYERS,
    only_imported_by: Mapping[str, Sequence[str]] = ONLY_IMPORTED_BY,
) -> list[Violation]:
    """Every violation of rules (a)-(c) in the package at ``package_dir``, sorted."""
    modules, imports = collect_imports(package_dir)
    found: dict[tuple[str, str, str], Violation] = {}

    def add(v: Violation) -> None:
        found.setdefault(v.key, v)  # one entry per (kind, importer, target): the first line

    for module in modules:
        if layer_of(module, layers) is None:
            add(Violation("unplaced", module, "", f"{module} belongs to no layer: add it to LAYERS"))

    edges: dict[str, set[str]] = {}
    sites: dict[tuple[str, str], Import] = {}
    for imp in imports:
        where = _where(imp, package_dir)
        if not imp.typing_only:
            edges.setdefault(imp.importer, set()).add(imp.target)
            sites.setdefault((imp.importer, imp.target), imp)
        # (b) private modules
        last = imp.target.rpartition(".")[2]
        if last.startswith("_") and not last.startswith("__"):
            home = imp.target.rpartition(".")[0]
            importer_pkg = _package(imp.importer, modules[imp.importer][1])
            if importer_pkg != home:
                add(Violation("private", imp.importer, imp.target,
                              f"{where}: {imp.importer} imports {imp.target}, private to {home}"))
        # (c) layers; a module with a list of allowed importers is checked by that list only
        guarded = next((g for g in only_imported_by
                        if imp.target == g or imp.target.startswith(g + ".")), None)
        if guarded is not None:
            mine = imp.importer == guarded or imp.importer.startswith(guarded + ".")
            allowed = only_imported_by[guarded]
            if not mine and imp.importer not in allowed:
                add(Violation("restricted", imp.importer, guarded,
                              f"{where}: {imp.importer} imports {guarded}, which only "
                              f"{', '.join(allowed)} may import"))
            continue
        li, lt = layer_of(imp.importer, layers), layer_of(imp.target, layers)
        if li is not None and lt is not None and lt > li:
            add(Violation("layer", imp.importer, imp.target,
                          f"{where}: {imp.importer} (layer {li}) imports {imp.target} "
                          f"(layer {lt}, above it)"))

    # (a) cycles, with the import lines that close them
    for component in _cycles(modules, edges):
        members = set(component)
        lines = [f"{_where(sites[(a, b)], package_dir)} {a} -> {b}"
                 for a in component for b in sorted(edges.get(a, ())) if b in members]
        add(Violation("cycle", ", ".join(component), "",
                      "import cycle between " + ", ".join(component) + ":\n      "
                      + "\n      ".join(lines)))
    return sorted(found.values(), key=lambda v: v.key)


def report(violations: Sequence[Violation], known: frozenset[tuple[str, str, str]]) -> str:
    """Human-readable list: new violations, known ones, and known ones now fixed."""
    keys = {v.key for v in violations}
    new = [v for v in violations if v.key not in known]
    old = [v for v in violations if v.key in known]
    fixed = sorted(known - keys)
    out = [f"{len(new)} new violation(s):", *(f"  {v}\n      key: {v.key!r}" for v in new),
           f"{len(old)} known violation(s) (KNOWN_VIOLATIONS, being removed):",
           *(f"  {v}" for v in old),
           f"{len(fixed)} entry(ies) of KNOWN_VIOLATIONS no longer occur (remove them):",
           *(f"  {k!r}" for k in fixed)]
    return "\n".join(out)


# ============================================================================ the package


@pytest.fixture(scope="module")
def violations(package_dir: Path) -> list[Violation]:
    return check_import_graph(package_dir)


def test_import_graph_has_no_new_violations(violations: list[Violation]) -> None:
    new = [v for v in violations if v.key not in KNOWN_VIOLATIONS]
    assert not new, report(violations, KNOWN_VIOLATIONS)


def test_known_violations_still_occur(violations: list[Violation]) -> None:
    # The allow-list only shrinks: an entry that no longer occurs must be removed.
    fixed = KNOWN_VIOLATIONS - {v.key for v in violations}
    assert not fixed, report(violations, KNOWN_VIOLATIONS)


def test_science_never_imports_report_or_cli(package_dir: Path) -> None:
    # Rule (c) stated directly for the two top consumers, with no allow-list: nothing
    # below report/ imports report/ or the CLI, not even for types.
    _, imports = collect_imports(package_dir)
    upward = [f"{_where(i, package_dir)}: {i.importer} -> {i.target}" for i in imports
              if i.target.startswith(("gpctools.report", "gpctools.cli"))
              and not i.importer.startswith(("gpctools.report", "gpctools.cli", "gpctools.demo"))]
    assert not upward, "\n".join(upward)


def test_every_module_is_parsed(package_dir: Path) -> None:
    # The checker sees the whole package (a parse failure or a missed folder would hide
    # violations): the modules it finds are exactly the .py files on disk.
    modules, imports = collect_imports(package_dir)
    assert len(modules) == len(list(package_dir.rglob("*.py")))
    assert {"gpctools.cli", "gpctools.errors", "gpctools.io.chromatogram"} <= set(modules)
    # and it reads imports inside functions: the CLI imports the library lazily.
    assert any(i.importer == "gpctools.cli" and i.target.startswith("gpctools.batch") for i in imports)


# ============================================================================ the checker on a toy package


def _toy(root: Path, files: Mapping[str, str]) -> Path:
    pkg = root / "toy"
    for rel, text in files.items():
        path = pkg / rel
        path.parent.mkdir(parents=True, exist_ok=True)
        path.write_text(text, encoding="utf-8")
    return pkg


TOY_LAYERS = (("toy", "toy.base", "toy._util"), ("toy.mid", "toy.sim"), ("toy.top",))


def test_checker_finds_each_kind_of_violation(tmp_path: Path) -> None:
    pkg = _toy(tmp_path, {
        "__init__.py": "",
        "_util.py": "",
        "base.py": (
            "from typing import TYPE_CHECKING\n"
            "if TYPE_CHECKING:\n"
            "    from toy.mid import a\n"          # typing only: layer yes, cycle no
            "def f():\n"
            "    from . import top\n"              # upward, inside a function
            "    return top\n"),
        "mid/__init__.py": "from . import a, b\n",
        "mid/_private.py": "",
        "mid/a.py": "from toy import _util\nfrom . import _private\n\ndef g():\n    import toy.mid.b\n",
        "mid/b.py": "from .a import g\nfrom ..sim import make\nfrom .. import base\n",
        "sim.py": "def make():\n    from toy.mid.a import g\n",
        "top/__init__.py": "",
        "top/view.py": "from toy.mid._private import x\nimport toy.sim\n",
        "stray.py": "",
    })
    found = check_import_graph(pkg, TOY_LAYERS, {"toy.sim": ("toy.top.view",)})
    keys = {v.key for v in found}
    assert keys == {
        ("unplaced", "toy.stray", ""),
        ("layer", "toy.base", "toy.top"),              # function-level import seen
        ("layer", "toy.base", "toy.mid.a"),            # TYPE_CHECKING import seen for layers
        ("private", "toy.mid.a", "toy._util"),         # top-level private from a subpackage
        ("private", "toy.top.view", "toy.mid._private"),
        ("restricted", "toy.mid.b", "toy.sim"),
        ("cycle", "toy.mid.a, toy.mid.b, toy.sim", ""),  # a -> b (in a function) -> sim -> a
    }, report(found, frozenset())
    # not violations: the same-package private import (mid.a -> mid._private), the
    # allowed importer of the simulator (top.view), a downward import (mid.b -> base)
    cycle = next(v for v in found if v.kind == "cycle")
    assert "toy/mid/a.py:5 toy.mid.a -> toy.mid.b" in cycle.detail


def test_checker_passes_a_clean_package(tmp_path: Path) -> None:
    pkg = _toy(tmp_path, {
        "__init__.py": "",
        "_util.py": "",
        "base.py": "from . import _util\nimport os\nfrom typing import TYPE_CHECKING\n"
                   "if TYPE_CHECKING:\n    from toy.mid.a import g\n",
        "mid/__init__.py": "from .a import g\n",
        "mid/a.py": "from toy.base import *\nfrom . import _h\n\ndef g():\n    from toy import base\n",
        "mid/_h.py": "",
        "top/__init__.py": "from ..mid import g\nfrom toy.mid.a import g as h\n",
    })
    # the TYPE_CHECKING import base -> mid.a points upward: a layer violation, but no cycle
    found = check_import_graph(pkg, TOY_LAYERS, {})
    assert [v.key for v in found] == [("layer", "toy.base", "toy.mid.a")], report(found, frozenset())


def test_cycle_detection_on_a_ring_and_a_self_contained_chain() -> None:
    edges = {"a": {"b"}, "b": {"c"}, "c": {"a"}, "d": {"e"}, "e": set(), "f": {"f"}}
    # a self-import is not an edge the collector produces; a ring of three is one cycle
    assert _cycles("abcdef", edges) == [["a", "b", "c"]]


def test_relative_import_resolution() -> None:
    assert _absolute("gpctools.transfer.mayo", False, 1, "_stats") == "gpctools.transfer._stats"
    assert _absolute("gpctools.transfer", True, 1, "mayo") == "gpctools.transfer.mayo"
    assert _absolute("gpctools.transfer.mayo", False, 2, "io") == "gpctools.io"
    assert _absolute("gpctools.report.plots", False, 2, None) == "gpctools"
    assert _absolute("gpctools.cli", False, 0, "gpctools.io") == "gpctools.io"


if __name__ == "__main__":  # pragma: no cover - a report for people
    here = Path(__file__).resolve().parent.parent / "gpctools"
    print(report(check_import_graph(here), KNOWN_VIOLATIONS))
    sys.exit(0)
