"""Every notebook runs top to bottom in a fresh kernel, and every number its text states is the one it computes.

A number in a notebook's text is written as ``<span title="EXPRESSION">TEXT</span>``: the test evaluates
EXPRESSION in the notebook's kernel after the last cell and checks that TEXT is its value, rounded to the
significant digits TEXT shows. Digits left outside such spans (and outside code) fail the test, unless they
are part of a name or formula listed in ``NOT_RESULTS``.
"""

import json
import math
import os
import re
from pathlib import Path

import pytest

NOTEBOOKS = sorted((Path(__file__).resolve().parents[2] / "notebooks").glob("*.ipynb"))


CLAIM = re.compile(r'<span title="(?P<expr>[^"]+)">(?P<text>[^<]+)</span>')
CLAIMS_MARK = "TDAKIT-CLAIMS "
# Digits in the text that are names or formulas, not results: homology degrees, file names, the DTM radius
# formula, growth rates.
NOT_RESULTS = re.compile(r"`[^`]*`|\bH\d\b|\d\d_[a-z_]+\.ipynb|\d+ε|\d+c\b|n\^\(-1/3\)|\b3-torus\b|"
                         r"\b2 ×|\b\d+-(?:D|coordinate|channel)\b|^#+ .*$", re.MULTILINE)


def stated_claims(book) -> list[tuple[str, str]]:
    """(expression, text) for every number the notebook's markdown states."""
    return [(m["expr"], m["text"]) for cell in book.cells if cell.cell_type == "markdown"
            for m in CLAIM.finditer(cell.source)]


def loose_numbers(book) -> list[str]:
    """Digits in the markdown that are neither a checked claim nor a name or formula."""
    found = []
    for cell in book.cells:
        if cell.cell_type == "markdown":
            text = NOT_RESULTS.sub(" ", CLAIM.sub(" ", cell.source))
            found += re.findall(r"[^\s]*\d[^\s]*", text)
    return found


def matches(text: str, value) -> bool:
    """Whether ``text`` shows ``value`` to the significant digits it prints (a string value must be equal)."""
    if isinstance(value, str):
        return text == value
    digits = text.replace(",", "").replace("\u202f", "").strip()
    mantissa = digits.split("e")[0].lstrip("-").replace(".", "").lstrip("0") or "0"
    significant = len(mantissa) if "." in digits or "e" in digits else len(mantissa.rstrip("0")) or 1
    shown = float(digits)
    if value == 0 or shown == 0:
        return shown == value
    scale = 10 ** (math.floor(math.log10(abs(value))) - significant + 1)
    return math.isclose(round(value / scale) * scale, shown, rel_tol=1e-9, abs_tol=scale * 1e-9)


def claims_cell(claims) -> str:
    exprs = json.dumps([expr for expr, _ in claims])
    return ("import json as _json, numpy as _np\n"
            "def _plain(v):\n"
            "    v = v.item() if isinstance(v, _np.generic) else v\n"
            "    return v if isinstance(v, str) else float(v)\n"
            f"print({CLAIMS_MARK!r} + _json.dumps([_plain(eval(_e)) for _e in {exprs}]))")


def execute(path: Path, claims=()):
    """Run a notebook headlessly (then evaluate ``claims``); return it with outputs. Raises on any error."""
    import nbformat
    from nbclient import NotebookClient

    book = nbformat.read(path, as_version=4)
    if claims:
        book.cells.append(nbformat.v4.new_code_cell(claims_cell(claims)))
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


def claimed_values(book) -> list:
    for output in book.cells[-1].get("outputs", []):
        if output.get("name") == "stdout" and CLAIMS_MARK in output.get("text", ""):
            return json.loads(output["text"].split(CLAIMS_MARK, 1)[1])
    raise AssertionError("the claims cell printed nothing")


@pytest.mark.parametrize("path", NOTEBOOKS, ids=lambda p: p.stem)
def test_every_number_in_the_text_is_checked(path):
    import nbformat

    book = nbformat.read(path, as_version=4)
    assert loose_numbers(book) == [], f"{path.name}: numbers stated without a checked expression"


@pytest.mark.parametrize(("text", "value", "expected"), [
    ("12,000", 12000, True), ("1.109e-05", 1.10949e-05, True), ("24", 23.72, True), ("0.543", 0.5434, True),
    ("0.543", 0.5446, False), ("6", 5, False), ("H0 6", "H0 6", True), ("2.01", 2.0149, True)])
def test_claim_matching_rounds_to_the_digits_shown(text, value, expected):
    assert matches(text, value) is expected


@pytest.mark.notebook
@pytest.mark.parametrize("path", NOTEBOOKS, ids=lambda p: p.stem)
def test_notebook_runs_and_states_what_it_computes(path):
    import nbformat

    claims = stated_claims(nbformat.read(path, as_version=4))
    book = execute(path, claims)
    if claims:
        wrong = [(expr, text, value) for (expr, text), value in zip(claims, claimed_values(book))
                 if not matches(text, value)]
        assert wrong == [], f"{path.name}: the text states numbers the notebook does not compute: {wrong}"
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
