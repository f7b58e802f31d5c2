"""The student notebooks: each .ipynb in notebooks/ is its own source (edit it in Jupyter, then clear the
outputs), and each runs top to bottom on the bundled demo data without an error (executed with nbclient on this
interpreter's kernel).

These are not physics checks: the physics in the notebooks is tested against its published sources in the
module tests (test_accretion.py, test_layers.py, ...). Here a notebook fails if it is stored with outputs, if
it lacks the advisory caution, if it reaches into private or changing internals, or if any cell raises.
"""

from __future__ import annotations

import ast
import json
import re
import sys
from pathlib import Path

import pytest

NOTEBOOK_DIR = Path(__file__).resolve().parent.parent / "notebooks"
EXPECTED = [
    "01_sounding_to_supercooled_layers.ipynb",
    "02_drop_size_and_speed.ipynb",
    "03_screening_a_route.ipynb",
    "04_model_grid.ipynb",
    "05_how_sure.ipynb",  # issue 18: how sure is this forecast (the spread ensemble)
]
CELL_TIMEOUT_S = 180
# What the caution must say (project rule): advisory only, not a certified forecast, and defer to official
# aviation weather products, the aircraft's approved manuals and local regulations.
CAUTION_PHRASES = [
    r"advisory only",
    r"not a certified forecast",
    r"official aviation weather products",
    r"aircraft's approved flight manual",
    r"local regulations",
]
# Modules of icing.physics whose names the notebooks may use directly; the rest of the chain is reached through
# the public functions at the top of the package (icing.diagnose, icing.supercooled_layers, ...).
PHYSICS_PUBLIC = {"icing.physics.thermo", "icing.physics.envelopes"}
# Cell metadata that editors add while running a notebook (timings, scroll state): not to be committed.
VOLATILE_CELL_METADATA = {"execution", "ExecuteTime", "collapsed", "scrolled"}
CLEAR_HINT = "clear it with: jupyter nbconvert --clear-output --inplace notebooks/*.ipynb"

pytestmark = pytest.mark.skipif(not NOTEBOOK_DIR.is_dir(), reason="no notebooks folder in this copy")


def _raw(name):
    return json.loads((NOTEBOOK_DIR / name).read_text(encoding="utf-8"))


def _load(name):
    nbformat = pytest.importorskip("nbformat")
    return nbformat.read(NOTEBOOK_DIR / name, as_version=4)


def _private(name):
    """A leading underscore marks a private name; dunders such as __file__ are Python's own."""
    return name.startswith("_") and not (name.startswith("__") and name.endswith("__"))


def _code(cell):
    """A code cell's source as plain Python (IPython magics and shell lines commented out)."""
    source = "".join(cell["source"]) if isinstance(cell["source"], list) else cell["source"]
    return "\n".join("# " + line if line.lstrip().startswith(("%", "!")) else line for line in source.splitlines())


def test_the_four_notebooks_are_there():
    """Issue 8 asks for exactly these notebooks, and issue 13 for no generator script beside them."""
    assert sorted(p.name for p in NOTEBOOK_DIR.glob("*.ipynb")) == EXPECTED
    assert not list(NOTEBOOK_DIR.glob("*.py")), "the notebooks are their own source: no builder script"


@pytest.mark.parametrize("name", EXPECTED)
def test_stored_without_outputs(name):
    """Stored notebooks carry no outputs, execution counts, widget state or run-time cell metadata, so that a
    diff shows only what a person changed."""
    raw = _raw(name)
    assert raw["nbformat"] == 4
    code_cells = [c for c in raw["cells"] if c["cell_type"] == "code"]
    assert code_cells
    for cell in code_cells:
        assert cell["outputs"] == [], f"{name}: cell {cell.get('id')} has stored outputs; {CLEAR_HINT}"
        assert cell["execution_count"] is None, f"{name}: cell {cell.get('id')} has an execution count; {CLEAR_HINT}"
    for cell in raw["cells"]:
        assert not VOLATILE_CELL_METADATA & set(cell.get("metadata", {})), \
            f"{name}: cell {cell.get('id')} has run-time metadata; {CLEAR_HINT}"
    assert "widgets" not in raw["metadata"]
    assert raw["metadata"]["kernelspec"]["name"] == "python3"


@pytest.mark.parametrize("name", EXPECTED)
def test_valid_notebook_format(name):
    """Each file is a valid nbformat 4 notebook (the schema that Jupyter and nbclient read)."""
    nbformat = pytest.importorskip("nbformat")
    nbformat.validate(_load(name))


@pytest.mark.parametrize("name", EXPECTED)
def test_first_markdown_cell_states_the_caution(name):
    """The first markdown cell carries the advisory caution (project rule), before any result is shown;
    the notebook also prints icing.CAUTION and lists its published sources."""
    raw = _raw(name)
    markdown = ["".join(c["source"]) for c in raw["cells"] if c["cell_type"] == "markdown"]
    assert markdown, f"{name} has no markdown cell"
    first = re.sub(r"\s+", " ", markdown[0]).lower()
    missing = [p for p in CAUTION_PHRASES if not re.search(p, first)]
    assert not missing, f"{name}: the first markdown cell lacks {missing}"
    assert raw["cells"].index(next(c for c in raw["cells"] if c["cell_type"] == "markdown")) == 0
    assert any("icing.CAUTION" in _code(c) for c in raw["cells"] if c["cell_type"] == "code")
    assert "## References" in "\n".join(markdown)


@pytest.mark.parametrize("name", EXPECTED)
def test_uses_only_public_names(name):
    """No private name (a leading underscore) from the package, and of icing.physics only the modules meant
    for direct use; everything else goes through the public functions (icing.diagnose, ...)."""
    raw = _raw(name)
    source = "\n".join(_code(c) for c in raw["cells"] if c["cell_type"] == "code")
    tree = ast.parse(source, filename=name)
    bad = []
    for node in ast.walk(tree):
        if isinstance(node, ast.ImportFrom) and node.module and node.module.split(".")[0] == "icing":
            modules = [node.module]
            if node.module == "icing.physics":
                modules = [f"icing.physics.{a.name}" for a in node.names]
            bad += [a.name for a in node.names if _private(a.name)]
            bad += [m for m in modules if m.startswith("icing.physics.") and m not in PHYSICS_PUBLIC]
            bad += [m for m in modules if any(_private(part) for part in m.split("."))]
        elif isinstance(node, ast.Import):
            for alias in node.names:
                if alias.name.startswith("icing.physics.") and alias.name not in PHYSICS_PUBLIC:
                    bad.append(alias.name)
    # attribute chains such as icing.physics.layers.X or icing._private
    for chain in re.findall(r"\bicing(?:\.\w+)+", source):
        parts = chain.split(".")
        if any(_private(p) for p in parts[1:]):
            bad.append(chain)
        if len(parts) > 2 and parts[1] == "physics" and ".".join(parts[:3]) not in PHYSICS_PUBLIC:
            bad.append(chain)
    assert not bad, f"{name} uses non-public names: {sorted(set(bad))}"


@pytest.fixture
def this_kernel(tmp_path, monkeypatch):
    """A 'python3' kernelspec that runs this interpreter, found before any user-installed one."""
    spec_dir = tmp_path / "kernels" / "python3"
    spec_dir.mkdir(parents=True)
    spec = {"argv": [sys.executable, "-m", "ipykernel_launcher", "-f", "{connection_file}"],
            "display_name": "Python 3 (tests)", "language": "python"}
    (spec_dir / "kernel.json").write_text(json.dumps(spec), encoding="utf-8")
    monkeypatch.setenv("JUPYTER_PATH", str(tmp_path))
    monkeypatch.setenv("MPLBACKEND", "Agg")  # headless, whatever the machine's matplotlib settings
    return "python3"


@pytest.mark.parametrize("name", EXPECTED)
def test_notebook_runs_top_to_bottom(name, this_kernel):
    """Execute every cell in order from the notebooks folder; any cell raising fails the test (nbclient's
    default). The run shows the caution, draws at least one figure, and every code cell runs."""
    pytest.importorskip("ipykernel")
    nbclient = pytest.importorskip("nbclient")
    import icing

    nb = _load(name)
    client = nbclient.NotebookClient(nb, timeout=CELL_TIMEOUT_S, kernel_name=this_kernel,
                                     resources={"metadata": {"path": str(NOTEBOOK_DIR)}})
    client.execute()
    code_cells = [c for c in nb.cells if c.cell_type == "code"]
    assert all(c.execution_count is not None for c in code_cells)
    outputs = [o for c in code_cells for o in c.outputs]
    assert not [o for o in outputs if o.output_type == "error"]
    printed = "".join(o.get("text", "") for o in outputs if o.output_type == "stream" and o.name == "stdout")
    assert icing.CAUTION in printed, f"{name} does not print icing.CAUTION"
    figures = [o for o in outputs if "image/png" in o.get("data", {})]
    assert figures, f"{name} drew no figure"
