"""The tour notebook runs from top to bottom, so it never rots.

It is executed with nbclient on an ipykernel from the test extra. The kernel named "python3" is
pointed at this test's own interpreter through a kernelspec in a temporary $JUPYTER_PATH (which
comes first in Jupyter's search path), so the test works on a fresh machine where only
``pip install -e ".[test]"`` ran, whatever other "python3" kernels are installed.
"""

from __future__ import annotations

import json
import sys
from pathlib import Path

import nbformat
import pytest
from nbclient import NotebookClient

NOTEBOOK = Path(__file__).resolve().parents[1] / "notebooks" / "tour.ipynb"


@pytest.fixture
def python3_kernel(tmp_path, monkeypatch):
    """A 'python3' kernelspec that starts the interpreter running the tests."""
    jupyter = tmp_path / "jupyter"
    spec = jupyter / "kernels" / "python3"
    spec.mkdir(parents=True)
    kernel = {
        "argv": [sys.executable, "-m", "ipykernel_launcher", "-f", "{connection_file}"],
        "display_name": "Python 3 (gwdeficit tests)",
        "language": "python",
    }
    (spec / "kernel.json").write_text(json.dumps(kernel))
    monkeypatch.setenv("JUPYTER_PATH", str(jupyter))
    from jupyter_client.kernelspec import KernelSpecManager

    assert KernelSpecManager().get_kernel_spec("python3").argv[0] == sys.executable
    return "python3"


def _text_outputs(nb) -> str:
    parts = []
    for cell in nb.cells:
        for out in cell.get("outputs", []):
            if out.get("output_type") == "stream":
                parts.append(out.get("text", ""))
            elif "text/plain" in out.get("data", {}):
                parts.append(out["data"]["text/plain"])
    return "\n".join(parts)


def test_notebook_is_stored_clean_and_asks_for_python3():
    nb = nbformat.read(NOTEBOOK, as_version=4)
    nbformat.validate(nb)
    assert nb.metadata.kernelspec.name == "python3"
    code = [c for c in nb.cells if c.cell_type == "code"]
    assert code and all(not c.outputs and c.execution_count is None for c in code)
    source = "\n".join(c.source for c in code)
    # What the issue promises the tour shows: Parquet in pandas, metadata, a plot, two rates.
    assert "pd.read_parquet" in source and "gwdeficit.provenance" in source
    assert "plt.subplots" in source and "mass_loss_rates" in source


def test_tour_notebook_executes(python3_kernel, tmp_path, monkeypatch):
    monkeypatch.setenv("GWDEFICIT_TOUR_DIR", str(tmp_path / "tour"))
    nb = nbformat.read(NOTEBOOK, as_version=4)
    client = NotebookClient(
        nb,
        kernel_name=python3_kernel,
        timeout=600,
        startup_timeout=180,  # a loaded 2-core CI machine can be slow to start a kernel
        resources={"metadata": {"path": str(tmp_path)}},
    )
    client.execute()  # raises CellExecutionError on the first failing cell

    text = _text_outputs(nb)
    assert "rates.parquet == mass_loss_rates(...)" in text  # the file is the API's result
    assert "research estimate" in text.lower()  # the disclaimer from the metadata
    assert "cosmic:8 / local ratio" in text
    images = [
        out
        for cell in nb.cells
        for out in cell.get("outputs", [])
        if "image/png" in out.get("data", {})
    ]
    assert len(images) >= 1  # the custom plot
    demo_folder = tmp_path / "tour" / "demo"
    assert {"catalogue.parquet", "remnants.parquet", "rates.parquet"} <= {
        p.name for p in demo_folder.iterdir()
    }
