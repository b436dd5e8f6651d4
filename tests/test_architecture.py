"""The layering of DEVELOPERS.md "Architecture", enforced.

* import-linter's layers contract in pyproject.toml: protocol < physics < families < studies <
  report < cli, the two families independent of each other;
* no import cycle anywhere in the package (function-level imports included);
* studies, reports and the command line use a family only through its public API (the names in
  the family package's ``__all__``), never its inner modules.

Each check is also run on a small package made here with a deliberate violation, to show that it
can fail.
"""

from __future__ import annotations

import importlib
import sys
import textwrap
from pathlib import Path

import grimp
import pytest
from importlinter.cli import lint_imports

ROOT = Path(__file__).resolve().parents[1]
FAMILIES = ("gqsim.superposition", "gqsim.oscillators")
ABOVE_FAMILIES = ("gqsim.studies", "gqsim.report", "gqsim.cli")


def import_cycles(package: str) -> list[list[str]]:
    """Strongly connected components (size > 1) of the module import graph of ``package``."""
    graph = grimp.build_graph(package, cache_dir=None)
    edges = {m: set(graph.find_modules_directly_imported_by(m)) & graph.modules for m in graph.modules}
    index, low, stack, on_stack, out, counter = {}, {}, [], set(), [], [0]

    def visit(v):  # Tarjan's algorithm, iterative enough for a few hundred modules
        index[v] = low[v] = counter[0]
        counter[0] += 1
        stack.append(v)
        on_stack.add(v)
        for w in edges[v]:
            if w not in index:
                visit(w)
                low[v] = min(low[v], low[w])
            elif w in on_stack:
                low[v] = min(low[v], index[w])
        if low[v] == index[v]:
            comp = []
            while True:
                w = stack.pop()
                on_stack.discard(w)
                comp.append(w)
                if w == v:
                    break
            if len(comp) > 1:
                out.append(sorted(comp))

    for v in sorted(edges):
        if v not in index:
            visit(v)
    return out


def reaches_inside(package: str, families, above) -> list[str]:
    """Imports from the ``above`` layers into a family module that the family does not export."""
    graph = grimp.build_graph(package, cache_dir=None)
    bad = []
    for module in sorted(graph.modules):
        if not module.startswith(tuple(above)):
            continue
        for target in sorted(graph.find_modules_directly_imported_by(module)):
            for family in families:
                if target.startswith(family + "."):
                    public = getattr(importlib.import_module(family), "__all__", ())
                    if target[len(family) + 1:].split(".")[0] not in public:
                        bad.append(f"{module} -> {target}")
    return bad


def test_layers_contract_is_kept():
    assert lint_imports(config_filename=str(ROOT / "pyproject.toml"), no_cache=True) == 0


def test_no_import_cycles():
    assert import_cycles("gqsim") == []


def test_studies_reports_and_cli_use_only_the_families_public_api():
    assert reaches_inside("gqsim", FAMILIES, ABOVE_FAMILIES) == []


@pytest.fixture
def bad_package(tmp_path, monkeypatch):
    """A package ``badpkg`` whose bottom layer imports its top layer (a layering breach and a
    cycle), and whose top layer reaches inside a family module that is not exported."""
    pkg = tmp_path / "badpkg"
    for sub in ("top", "fam", "bottom"):
        (pkg / sub).mkdir(parents=True)
    (pkg / "__init__.py").write_text("")
    (pkg / "top" / "__init__.py").write_text("from badpkg.fam import inner\nfrom badpkg.fam.run import go\n")
    (pkg / "fam" / "__init__.py").write_text("__all__ = ['run']\nfrom badpkg.fam.run import go\n")
    (pkg / "fam" / "run.py").write_text("from badpkg import bottom\ndef go():\n    return 1\n")
    (pkg / "fam" / "inner.py").write_text("X = 1\n")
    (pkg / "bottom" / "__init__.py").write_text("def f():\n    from badpkg import top\n    return top\n")
    config = tmp_path / "contracts.toml"
    config.write_text(textwrap.dedent("""\
        [tool.importlinter]
        root_package = "badpkg"
        [[tool.importlinter.contracts]]
        name = "layers"
        type = "layers"
        containers = ["badpkg"]
        layers = ["top", "fam", "bottom"]
        """))
    monkeypatch.syspath_prepend(str(tmp_path))
    yield config
    for name in [m for m in sys.modules if m == "badpkg" or m.startswith("badpkg.")]:
        del sys.modules[name]


def test_each_check_fails_on_a_package_that_breaks_it(bad_package):
    assert lint_imports(config_filename=str(bad_package), no_cache=True) == 1
    assert import_cycles("badpkg") == [["badpkg.bottom", "badpkg.fam.run", "badpkg.top"]]
    assert reaches_inside("badpkg", ("badpkg.fam",), ("badpkg.top",)) == ["badpkg.top -> badpkg.fam.inner"]
