"""The layout contract: stages import only from stages below them, and no import cycle.

Run by ``make lint`` and ``make test``. The layers follow the data flow
(DEVELOPERS.md, "Architecture"): a module may import from its own layer and
the layers below it, never above. ``harbourwatch/__init__.py`` (the public
facade) is the one module allowed to import from every layer.
"""

from __future__ import annotations

import ast
from pathlib import Path

import pytest

PKG = Path(__file__).resolve().parent.parent / "harbourwatch"

#: Lowest first. A dotted name stands for a module or a whole subpackage.
LAYERS: tuple[tuple[str, ...], ...] = (
    ("errors", "units"),
    ("io",),
    ("models",),
    ("scene",),
    ("trajectories",),
    ("filter",),
    ("rules",),
    ("report",),
    ("scoring",),
    ("sim",),
    ("pipeline", "progress"),
    ("campaign",),
    ("cli", "__main__"),
)


def _module_name(path: Path) -> str:
    rel = path.relative_to(PKG.parent).with_suffix("")
    parts = list(rel.parts)
    if parts[-1] == "__init__":
        parts.pop()
    return ".".join(parts)


def _is_module(dotted: str) -> bool:
    base = PKG.parent / dotted.replace(".", "/")
    return base.with_suffix(".py").exists() or (base / "__init__.py").exists()


def _imports(path: Path) -> set[str]:
    """Every harbourwatch module ``path`` imports (also inside functions), bar type-only ones."""
    tree = ast.parse(path.read_text(encoding="utf-8"))
    type_only: set[int] = set()
    for node in ast.walk(tree):
        if isinstance(node, ast.If) and "TYPE_CHECKING" in ast.unparse(node.test):
            type_only |= {id(n) for b in node.body for n in ast.walk(b)}
    me = _module_name(path)
    pkg = me if path.name == "__init__.py" else me.rpartition(".")[0]
    out: set[str] = set()
    for node in ast.walk(tree):
        if id(node) in type_only:
            continue
        if isinstance(node, ast.ImportFrom):
            if node.level:
                base = pkg.split(".")
                base = base[: len(base) - (node.level - 1)]
                mod = ".".join(base + ([node.module] if node.module else []))
            else:
                mod = node.module or ""
            if mod.startswith("harbourwatch"):
                subs = {f"{mod}.{a.name}" for a in node.names if _is_module(f"{mod}.{a.name}")}
                out |= subs
                if len(subs) < len(node.names):  # names defined by the module itself
                    out.add(mod)
        elif isinstance(node, ast.Import):
            out |= {a.name for a in node.names if a.name.startswith("harbourwatch")}
    out.discard(me)
    return out


def _layer(module: str) -> int | None:
    parts = module.split(".")
    if len(parts) < 2:
        return None  # the package facade itself
    for i, names in enumerate(LAYERS):
        if parts[1] in names:
            return i
    raise AssertionError(f"{module} is in no layer: add it to LAYERS (and DEVELOPERS.md)")


MODULES = {_module_name(p): p for p in sorted(PKG.rglob("*.py"))}
GRAPH = {m: {i for i in _imports(p) if i in MODULES} for m, p in MODULES.items()}


@pytest.mark.parametrize("module", sorted(m for m in MODULES if m != "harbourwatch"))
def test_imports_point_down(module: str) -> None:
    mine = _layer(module)
    assert mine is not None
    for target in sorted(GRAPH[module]):
        theirs = _layer(target)
        if theirs is None:  # ``from harbourwatch import __version__`` only
            src = MODULES[module].read_text(encoding="utf-8")
            assert "from harbourwatch import __version__" in src, module
            continue
        assert theirs <= mine, f"{module} (layer {mine}) imports {target} (layer {theirs})"


def test_no_import_cycle() -> None:
    graph = {m: {t for t in ts if t != "harbourwatch"} for m, ts in GRAPH.items()}
    # a subpackage's __init__ re-exports its modules; its own modules must not import it back
    state: dict[str, int] = {}
    stack: list[str] = []

    def visit(m: str) -> None:
        state[m] = 1
        stack.append(m)
        for t in sorted(graph.get(m, ())):
            if state.get(t) == 1:
                cycle = stack[stack.index(t):] + [t]
                raise AssertionError("import cycle: " + " -> ".join(cycle))
            if t not in state:
                visit(t)
        stack.pop()
        state[m] = 2

    for m in sorted(graph):
        if m not in state:
            visit(m)


def test_layers_cover_every_top_level_entry() -> None:
    names = {n for layer in LAYERS for n in layer}
    entries = {p.stem if p.is_file() else p.name for p in PKG.iterdir()
               if (p.suffix == ".py" or (p.is_dir() and (p / "__init__.py").exists()))
               and p.name != "__init__.py"}
    assert entries == names
    assert len(list(p for p in PKG.iterdir() if not p.name.startswith("__pycache__"))) <= 18  # 17 stages and files, plus campaign/
