import subprocess
import sys

import tdakit


def test_import_stays_light():
    # The core must not drag the notebook or cluster stacks in: check in a fresh interpreter.
    code = ("import sys, tdakit; heavy = [m for m in ('ipywidgets', 'matplotlib.pyplot', 'dask', 'distributed', "
            "'persim', 'IPython') if m in sys.modules]; print(','.join(heavy))")
    result = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    assert result.stdout.strip() == ""


def test_public_names():
    for name in ("load_cloud", "select_landmarks", "compute_diagrams", "diagram_distance", "Cloud", "Diagrams",
                 "analyze", "rerun", "subsampling_study", "save_run", "load_run", "AnalysisOptions"):
        assert name in tdakit.__all__ and callable(getattr(tdakit, name))
    assert tdakit.__version__
