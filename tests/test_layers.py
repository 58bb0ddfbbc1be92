"""The layers of DEVELOPERS.md, "Layout": each module imports only from its own layer or below.

design -> netlist -> engine -> analysis -> pipeline -> checks -> report, sweeps on top, a thin CLI.
Every ``import`` counts, including those inside functions (a function-level import is still an
upward dependency); only imports under ``if TYPE_CHECKING:`` are left out, as they never run.
"""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parent.parent / "simkit"

#: Module (or package) prefix -> layer rank; the longest matching prefix wins.
RANKS: dict[str, int] = {
    "simkit": 0, "simkit.units": 0, "simkit.errors": 0, "simkit.figures": 0, "simkit.safety": 0,
    "simkit.progress": 0,
    # the design vocabulary and the types it declares
    "simkit.design": 1, "simkit.design.vocab": 1, "simkit.design.devices": 1, "simkit.design.sources": 1,
    "simkit.design.loads": 1, "simkit.design.morse": 1, "simkit.design.model": 1,
    "simkit.parts": 2,
    # reading files fills the model in from the part library
    "simkit.design.files": 3, "simkit.design.reader": 3, "simkit.design.loader": 3,
    "simkit.netlist": 4,
    "simkit.engine": 5,
    "simkit.analysis": 6,
    "simkit.pipeline": 7,
    "simkit.checks": 8,
    "simkit.report": 9,
    "simkit.sweep": 10,
    "simkit.cli": 11, "simkit.demo": 11, "simkit.docgen": 11, "simkit.goldens": 11, "simkit.templates": 11,
    # the Python API and the exploring commands: front ends like the command line
    "simkit.api": 11, "simkit.sidebyside": 11, "simkit.watch": 11,
    "simkit.__main__": 12,
}


def rank(module: str) -> int:
    best = ""
    for prefix in RANKS:
        if (module == prefix or module.startswith(prefix + ".")) and len(prefix) > len(best):
            best = prefix
    if not best:
        raise KeyError(f"{module} has no layer in RANKS: add it")
    return RANKS[best]


def module_name(path: Path) -> str:
    parts = list(path.relative_to(ROOT.parent).with_suffix("").parts)
    if parts[-1] == "__init__":
        parts.pop()
    return ".".join(parts)


#: The package's lazy API: ``simkit/__init__.py`` imports ``simkit.api`` inside its module-level
#: ``__getattr__``, which runs only when a program first looks up ``simkit.load`` (and the rest), after
#: the package is loaded.  Importing any module of simkit never runs it (checked below by
#: test_import_simkit_loads_no_other_module), so it is neither a dependency of layer 0 nor a loop;
#: this is the only import the walk leaves out for that reason.
LAZY_API = ("simkit", "simkit.api")


def _lazy_api(node: ast.AST, parents: dict[ast.AST, ast.AST], here: str) -> bool:
    """The package's ``from simkit import api`` inside its module ``__getattr__``."""
    if here != LAZY_API[0]:
        return False
    parent = parents.get(node)
    while parent is not None and not isinstance(parent, (ast.FunctionDef, ast.AsyncFunctionDef)):
        parent = parents.get(parent)
    return isinstance(parent, ast.FunctionDef) and parent.name == "__getattr__" and parents.get(parent) is not None \
        and isinstance(parents[parent], ast.Module)


def _type_checking_only(node: ast.AST, parents: dict[ast.AST, ast.AST]) -> bool:
    while node in parents:
        node = parents[node]
        if isinstance(node, ast.If) and "TYPE_CHECKING" in ast.unparse(node.test):
            return True
    return False


def imports(path: Path) -> list[tuple[int, str]]:
    """Every simkit module a file imports at run time: (line, module)."""
    tree = ast.parse(path.read_text(encoding="utf-8"))
    parents = {child: node for node in ast.walk(tree) for child in ast.iter_child_nodes(node)}
    here = module_name(path)
    package = here if path.name == "__init__.py" else here.rpartition(".")[0]
    found = []
    for node in ast.walk(tree):
        if isinstance(node, ast.Import):
            names = [a.name for a in node.names]
        elif isinstance(node, ast.ImportFrom):
            if node.level:
                base = package.split(".")[: len(package.split(".")) - node.level + 1]
                names = [".".join([*base, node.module] if node.module else base)]
            else:
                names = [node.module or ""]
            # "from simkit.x import y" may name a module y: rank it too
            for a in node.names:
                file = ROOT.parent / f"{names[0]}.{a.name}".replace(".", "/")
                if file.with_suffix(".py").exists() or file.is_dir():
                    names.append(f"{names[0]}.{a.name}")
        else:
            continue
        if _type_checking_only(node, parents):
            continue
        if _lazy_api(node, parents, here):
            names = [n for n in names if n != LAZY_API[1]]
        found += [(node.lineno, n) for n in names if n == "simkit" or n.startswith("simkit.")]
    return found


FILES = sorted(ROOT.rglob("*.py"))


def test_every_module_has_a_layer() -> None:
    for path in FILES:
        rank(module_name(path))


@pytest.mark.parametrize("path", FILES, ids=lambda p: str(p.relative_to(ROOT)))
def test_imports_go_down_the_layers(path: Path) -> None:
    here = module_name(path)
    mine = rank(here)
    upward = [f"line {line}: {name} (layer {rank(name)})" for line, name in imports(path)
              if name != "simkit" and rank(name) > mine]
    assert not upward, f"{here} (layer {mine}) imports from above: " + "; ".join(upward)


def test_the_checker_sees_an_upward_import(tmp_path: Path) -> None:
    # The rule itself: a netlist module importing the pipeline inside a function is caught.
    probe = ROOT / "netlist" / "_probe_layers.py"
    try:
        probe.write_text("def f():\n    from simkit.pipeline import simulate\n    return simulate\n")
        names = [n for _, n in imports(probe)]
        assert "simkit.pipeline" in names and rank("simkit.pipeline") > rank(module_name(probe))
    finally:
        probe.unlink()


def test_only_the_engine_imports_pyspice() -> None:
    for path in FILES:
        tree = ast.parse(path.read_text(encoding="utf-8"))
        for node in ast.walk(tree):
            mods = [a.name for a in node.names] if isinstance(node, ast.Import) else (
                [node.module or ""] if isinstance(node, ast.ImportFrom) else [])
            if any(m.split(".")[0] == "PySpice" for m in mods):
                assert module_name(path) == "simkit.engine.ngspice", f"{path} imports PySpice"


def test_no_import_loops() -> None:
    # Within a layer too: no module reaches itself through its imports (function-level ones included).
    mods = {module_name(p): p for p in FILES}

    def owner(name: str) -> str:
        while name and name not in mods:
            name = name.rpartition(".")[0]
        return name

    graph = {m: {owner(n) for _, n in imports(p)} - {"", m} for m, p in mods.items()}
    done: set[str] = set()

    def visit(m: str, path: tuple[str, ...]) -> None:
        if m in path:
            raise AssertionError("import loop: " + " -> ".join([*path[path.index(m):], m]))
        if m in done:
            return
        for n in sorted(graph[m]):
            visit(n, (*path, m))
        done.add(m)

    for m in sorted(graph):
        visit(m, ())


def test_the_lazy_api_is_the_only_import_left_out() -> None:
    init = ROOT / "__init__.py"
    tree = ast.parse(init.read_text(encoding="utf-8"))
    parents = {child: node for node in ast.walk(tree) for child in ast.iter_child_nodes(node)}
    lazy = [n for n in ast.walk(tree)
            if isinstance(n, (ast.Import, ast.ImportFrom)) and _lazy_api(n, parents, "simkit")]
    assert len(lazy) == 1 and isinstance(lazy[0], ast.ImportFrom) and [a.name for a in lazy[0].names] == ["api"]
    # Anywhere else the same import counts: a module of layer 0 importing the API at its top is caught.
    probe = ROOT / "_probe_lazy.py"
    try:
        probe.write_text("from simkit import api\n\n\ndef __getattr__(name):\n    from simkit import api\n")
        assert [n for _, n in imports(probe)].count("simkit.api") == 2
    finally:
        probe.unlink()


def test_import_simkit_loads_no_other_module() -> None:
    """``import simkit`` loads the package alone (the command line starts fast); the API comes on first use."""
    import subprocess
    import sys

    code = ("import sys, simkit; before = sorted(m for m in sys.modules if m.startswith('simkit')); "
            "heavy = sorted(m for m in ('numpy', 'scipy', 'matplotlib', 'PySpice') if m in sys.modules); "
            "simkit.load; print(before, heavy, 'simkit.api' in sys.modules)")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True).stdout.strip()
    assert out == "['simkit'] [] True"
