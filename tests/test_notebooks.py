"""The worked examples in notebooks/ run from top to bottom (executed with nbclient, a general-purpose library)."""

from pathlib import Path

import pytest

NOTEBOOKS = sorted((Path(__file__).parents[1] / "notebooks").glob("*.ipynb"))


@pytest.mark.parametrize("path", NOTEBOOKS, ids=[p.stem for p in NOTEBOOKS])
def test_notebook_runs_and_is_stored_without_outputs(path, tmp_path):
    nbformat = pytest.importorskip("nbformat")
    nbclient = pytest.importorskip("nbclient")
    nb = nbformat.read(path, as_version=4)
    # outputs are stripped in git: the notebook shows what the reader's own run produces
    assert all(not c.get("outputs") for c in nb.cells if c.cell_type == "code")
    client = nbclient.NotebookClient(nb, timeout=120, kernel_name="python3", resources={"metadata": {"path": str(tmp_path)}})
    client.execute()
    errors = [o for c in nb.cells if c.cell_type == "code" for o in c.outputs if o.output_type == "error"]
    assert not errors
    assert any(c.outputs for c in nb.cells if c.cell_type == "code")


def test_both_worked_examples_are_present():
    assert {p.name for p in NOTEBOOKS} == {"one_structure.ipynb", "screen_a_family.ipynb"}
