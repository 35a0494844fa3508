"""The package's architecture, checked from its source: no import cycles (including imports inside
functions), no private name imported from another module, data flowing one way between stages,
and no module too long to read.

The stages, in the order data flow through them (``nullfit/__init__.py``, DEVELOPERS.md); a module
may import from its own stage and from stages to its left, never to its right.
"""

import ast
from pathlib import Path

import pytest

PKG = Path(__file__).resolve().parents[1] / "nullfit"
STAGES = ["core", "reading", "fitting", "limits", "hypothesis", "simulation", "campaign", "figures", "output", "cli"]
MAX_LINES = 600


def _module_name(path: Path) -> str:
    parts = path.relative_to(PKG.parent).with_suffix("").parts
    return ".".join(parts[:-1] if parts[-1] == "__init__" else parts)


MODULES = {_module_name(p): p for p in sorted(PKG.rglob("*.py"))}


def _resolve(current: str, is_pkg: bool, module: str | None, level: int) -> str:
    if level == 0:
        return module or ""
    base = current.split(".") if is_pkg else current.split(".")[:-1]
    base = base[: len(base) - (level - 1)]
    return ".".join(base + ([module] if module else []))


def _imports(name: str, path: Path):
    """``(target module, imported name or None, line)`` for every import in the module, at any depth."""
    is_pkg = path.name == "__init__.py"
    for node in ast.walk(ast.parse(path.read_text(encoding="utf-8"))):
        if isinstance(node, ast.Import):
            for a in node.names:
                if a.name.startswith("nullfit"):
                    yield a.name, None, node.lineno
        elif isinstance(node, ast.ImportFrom):
            target = _resolve(name, is_pkg, node.module, node.level)
            if not target.startswith("nullfit"):
                continue
            for a in node.names:
                sub = f"{target}.{a.name}"
                if sub in MODULES:  # ``from . import belt`` imports a module
                    yield sub, None, node.lineno
                else:
                    yield target, a.name, node.lineno


GRAPH = {m: sorted({t for t, _, _ in _imports(m, p) if t in MODULES and t != m}) for m, p in MODULES.items()}


def _stage(module: str) -> str | None:
    parts = module.split(".")
    return parts[1] if len(parts) > 1 else None


def test_every_module_is_in_a_known_stage():
    unknown = sorted({_stage(m) for m in MODULES if _stage(m) is not None} - set(STAGES))
    assert not unknown, f"modules outside the stages {STAGES}: {unknown}"


def test_no_import_cycles():
    state: dict[str, int] = {}
    stack: list[str] = []
    cycles = []

    def visit(m):
        state[m] = 1
        stack.append(m)
        for t in GRAPH[m]:
            if state.get(t) == 1:
                cycles.append(stack[stack.index(t):] + [t])
            elif t not in state:
                visit(t)
        stack.pop()
        state[m] = 2

    for m in MODULES:
        if m not in state:
            visit(m)
    assert not cycles, "import cycles: " + "; ".join(" → ".join(c) for c in cycles)


def test_no_private_names_imported_from_other_modules():
    bad = []
    for m, p in MODULES.items():
        for target, name, line in _imports(m, p):
            if name is not None and name.startswith("_") and not name.startswith("__") and target != m:
                bad.append(f"{p.relative_to(PKG.parent)}:{line} imports {name} from {target}")
    tree_bad = []
    for m, p in MODULES.items():  # module._private attribute access on an imported nullfit module
        aliases = {}
        tree = ast.parse(p.read_text(encoding="utf-8"))
        for node in ast.walk(tree):
            if isinstance(node, ast.ImportFrom):
                target = _resolve(m, p.name == "__init__.py", node.module, node.level)
                for a in node.names:
                    if f"{target}.{a.name}" in MODULES:
                        aliases[a.asname or a.name] = f"{target}.{a.name}"
        for node in ast.walk(tree):
            if (isinstance(node, ast.Attribute) and isinstance(node.value, ast.Name) and node.value.id in aliases
                    and node.attr.startswith("_") and not node.attr.startswith("__")):
                tree_bad.append(f"{p.relative_to(PKG.parent)}:{node.lineno} uses {node.value.id}.{node.attr}")
    assert not bad + tree_bad, "\n".join(bad + tree_bad)


def test_data_flow_one_way_between_stages():
    order = {s: i for i, s in enumerate(STAGES)}
    bad = []
    for m, targets in GRAPH.items():
        s = _stage(m)
        if s is None:
            continue
        for t in targets:
            ts = _stage(t)
            if ts is not None and order[ts] > order[s]:
                bad.append(f"{m} ({s}) imports {t} ({ts})")
    assert not bad, "\n".join(bad)


def test_figures_draw_and_do_not_fit():
    """Figures call the stages; they never build a design or solve a least-squares problem."""
    bad = []
    for m, p in MODULES.items():
        if _stage(m) != "figures":
            continue
        text = p.read_text(encoding="utf-8")
        for word in ("lstsq", "np.linalg.solve", "np.linalg.inv", "pinv", "legvander", "reduceat"):
            if word in text:
                bad.append(f"{m} uses {word}")
    assert not bad, "\n".join(bad)


@pytest.mark.parametrize("module", sorted(MODULES))
def test_module_length(module):
    n = len(MODULES[module].read_text(encoding="utf-8").splitlines())
    assert n <= MAX_LINES, f"{module} has {n} lines (at most {MAX_LINES})"


def test_the_repository_stands_on_its_own():
    """Nothing in the repository points outside it (DEVELOPERS.md, "The repository stands on its
    own"): no file cites the planning folder or the planning notes the project started from."""
    root = PKG.parent
    # spelled in pieces so that this file does not itself count as a citation
    needles = ("shared" + "/", "DESIGN" + ".md")
    hits = []
    files = [p for p in root.iterdir() if p.is_file()]
    for folder in ("nullfit", "tests", "docs", "notebooks", "benchmarks", "data_demo", ".ci"):
        files += [p for p in (root / folder).rglob("*") if p.is_file() and "__pycache__" not in p.parts]
    for p in files:
        if p.suffix not in {".py", ".md", ".toml", ".ipynb", ".txt", ".cfg", ""}:
            continue
        text = p.read_text(encoding="utf-8", errors="replace")
        hits += [f"{p.relative_to(root)} mentions {n!r}" for n in needles if n in text]
    assert not hits, "\n".join(hits)
