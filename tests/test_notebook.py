"""The walkthrough notebook runs top to bottom on the demo region."""

from __future__ import annotations

import nbformat
from nbclient import NotebookClient

from conftest import REPO


def test_walkthrough_notebook_executes(tmp_path, monkeypatch):
    monkeypatch.setenv("AQUITARDMAP_NOTEBOOK_OUT", str(tmp_path))
    nb = nbformat.read(REPO / "notebooks" / "walkthrough.ipynb", as_version=4)
    NotebookClient(nb, timeout=600, kernel_name="python3",
                   resources={"metadata": {"path": str(REPO / "notebooks")}}).execute()
    assert (tmp_path / "ostrel_run" / "map.html").exists()
    text = "".join(o.get("text", "") for c in nb.cells if c.cell_type == "code"
                   for o in c.get("outputs", []))
    assert "lower_bound" in text
