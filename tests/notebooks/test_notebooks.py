"""Every notebook runs top to bottom in a fresh kernel; a broken notebook is caught."""

import os
from pathlib import Path

import pytest

NOTEBOOKS = sorted((Path(__file__).resolve().parents[2] / "notebooks").glob("*.ipynb"))


def execute(path: Path):
    """Run a notebook headlessly; return it with outputs and widget state. Raises on any error."""
    import nbformat
    from nbclient import NotebookClient

    book = nbformat.read(path, as_version=4)
    os.environ.setdefault("MPLBACKEND", "Agg")
    client = NotebookClient(book, timeout=600, startup_timeout=120, kernel_name="python3", store_widget_state=True,
                            resources={"metadata": {"path": str(path.parent)}})
    client.execute()
    for cell in book.cells:
        for output in cell.get("outputs", []):
            assert output.get("output_type") != "error", f"{path.name}: {output.get('ename')}"
            if output.get("name") == "stderr":
                assert "Traceback" not in output.get("text", ""), f"{path.name}: {output['text']}"
    return book


def test_there_are_four_notebooks():
    assert [p.name for p in NOTEBOOKS] == ["01_quick_start.ipynb", "02_choosing_subsampling.ipynb",
                                           "03_publication_figure.ipynb", "04_scaling_out_with_dask.ipynb"]


@pytest.mark.notebook
@pytest.mark.parametrize("path", NOTEBOOKS, ids=lambda p: p.stem)
def test_notebook_runs_without_errors(path):
    book = execute(path)
    widgets = book.metadata.get("widgets", {}).get("application/vnd.jupyter.widget-state+json", {})
    if any("tdakit.widgets" in cell.source for cell in book.cells):
        models = widgets.get("state", {}).values()
        assert any(m.get("model_name") == "ButtonModel" for m in models), "the panel's widgets were not created"


@pytest.mark.notebook
def test_a_broken_notebook_is_caught(tmp_path):
    import nbformat
    from nbclient.exceptions import CellExecutionError

    book = nbformat.v4.new_notebook()
    book.metadata["kernelspec"] = {"name": "python3", "display_name": "Python 3", "language": "python"}
    book.cells = [nbformat.v4.new_code_cell("import tdakit"),
                  nbformat.v4.new_code_cell("tdakit.select_landmarks(None, 3)")]
    path = tmp_path / "broken.ipynb"
    nbformat.write(book, path)
    with pytest.raises(CellExecutionError, match="InvalidParameterError"):
        execute(path)
