"""The package's structure: imports run one way and only public names cross modules.

Common practice of layered libraries (and the project's design, DESIGN.md: command line -> flight/grid ->
physics -> thermodynamics): no module imports, directly or through others, a module that imports it back, and
no module takes a name with a leading underscore from another one. Checked by walking ``icing/`` with ``ast``.
"""

from __future__ import annotations

import ast
from pathlib import Path

ROOT = Path(__file__).parents[1] / "icing"


def _modules():
    mods = {}
    for f in ROOT.rglob("*.py"):
        parts = f.relative_to(ROOT.parent).with_suffix("").parts
        name = ".".join(parts[:-1] if parts[-1] == "__init__" else parts)
        mods[name] = f
    return mods


def _imports(mods):
    """For every module: the modules it imports (any depth of function), and private names it takes."""
    edges, private = {}, []
    for name, f in mods.items():
        pkg = name if f.name == "__init__.py" else name.rsplit(".", 1)[0]
        deps = set()
        for node in ast.walk(ast.parse(f.read_text(encoding="utf-8"))):
            if isinstance(node, ast.Import):
                deps |= {a.name for a in node.names if a.name in mods and a.name != name}
            elif isinstance(node, ast.ImportFrom):
                base = node.module or ""
                if node.level:
                    up = pkg.split(".")[: len(pkg.split(".")) - node.level + 1]
                    base = ".".join(up + ([node.module] if node.module else []))
                if not base.startswith("icing"):
                    continue
                for a in node.names:
                    full = f"{base}.{a.name}"
                    target = full if full in mods else base
                    if target in mods and target != name and mods[target].name != "__init__.py":
                        deps.add(target)
                    if a.name.startswith("_") and not a.name.startswith("__") and full not in mods:
                        private.append(f"{name} takes {a.name} from {base}")
        edges[name] = deps
    return edges, private


def test_no_import_cycles():
    edges, _ = _imports(_modules())
    state, cycles = {}, []

    def visit(u, stack):
        state[u] = 1
        stack.append(u)
        for v in sorted(edges.get(u, ())):
            if state.get(v) == 1:
                cycles.append(" -> ".join(stack[stack.index(v):] + [v]))
            elif not state.get(v):
                visit(v, stack)
        state[u] = 2
        stack.pop()

    for u in sorted(edges):
        if not state.get(u):
            visit(u, [])
    assert not cycles, "import cycles:\n" + "\n".join(cycles)


def test_no_private_names_across_modules():
    _, private = _imports(_modules())
    assert not private, "\n".join(private)


def test_physics_does_not_import_upwards():
    """icing.physics imports nothing from the flight, grid, report, io or command-line layers."""
    edges, _ = _imports(_modules())
    upward = [f"{m} imports {d}" for m, deps in edges.items() if m.startswith("icing.physics")
              for d in deps if d.startswith(("icing.flight", "icing.grid", "icing.report", "icing.io", "icing.cli"))]
    assert not upward, "\n".join(upward)
