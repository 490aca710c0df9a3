"""The subsampling panel and the two-catalogue panel: state never stale, sizes that work, reachable p-values."""

from math import comb

import numpy as np
import pytest

import tdakit
from tdakit.widgets import ComparisonPanel, SubsamplingPanel
from tdakit.widgets.comparison import smallest_p_value

from .conftest import descendants


def test_subsampling_panel_runs_the_study_and_compares_two_settings(ring):
    panel = SubsamplingPanel(ring, seed=2)
    assert panel.controls["compare"].disabled  # nothing to compare before a study
    panel.controls["counts"].value = "10, 20, 40"
    panel.controls["seeds"].value = 2
    panel.controls["run"].click()
    assert panel.wait() == "done" and panel.views["study"].value[:4] == b"\x89PNG"
    assert "maxmin" in panel.recommendation.value and len(panel.study.cells) == 2 * 3 * 2
    panel.controls["first"].value = ("maxmin", 10)
    panel.controls["second"].value = ("random", 40)
    panel.controls["compare"].click()
    assert panel.wait() == "done" and panel.views["pair"].value[:4] == b"\x89PNG"
    assert "maxmin, 10 landmarks | random, 40 landmarks" in panel.pair_actions.status.value
    panel.controls["counts"].value = "10, 20"
    assert panel.views["study"].stale and not panel.views["pair"].stale
    panel.controls["run"].click()  # a new study: the old side-by-side plot and its choices go at once
    assert panel.pair is None and not panel.views["pair"].value and panel.controls["first"].options == ()
    assert panel.controls["compare"].disabled
    assert panel.wait() == "done" and [v for _, v in panel.controls["first"].options][-1] == ("random", 20)
    panel.controls["counts"].value = "ten"
    panel.controls["run"].click()
    assert "'counts'" in panel.log.text
    panel.close()


def test_subsampling_panel_controls_keep_their_width_and_labels(ring):
    panel = SubsamplingPanel(ring)
    columns = [w for w in descendants(panel.root) if getattr(w.layout, "min_width", None) == "450px"]
    assert len(columns) == 2  # the study's and the pair's controls never shrink below their labels
    texts = " ".join(getattr(w, "value", "") for w in descendants(panel.root) if hasattr(w, "value")
                     and isinstance(w.value, str))
    for words in ("Methods", "Landmark counts", "Seeds per setting", "Setting A", "Setting B"):
        assert words in texts  # full labels in their own widgets, not cut widget descriptions
    assert all(not getattr(w, "description", "") or w.description in ("Run study", "Cancel",
                                                                       "Compare the two settings")
               for w in descendants(panel.root))


@pytest.mark.parametrize("pieces, expected", [(2, 2 / 6), (3, 2 / 20), (4, 2 / 70), (9, 1 / 10_000)])
def test_smallest_reachable_p_value(pieces, expected):
    # exact test: the observed split and its mirror are the best 2 of C(2n, n) labelings; 9 + 9 pieces have
    # C(18, 9) = 48620 labelings, above the exact limit, so 9,999 random ones are drawn: p >= 1 / 10,000.
    assert smallest_p_value(pieces) == pytest.approx(expected)


def test_comparison_panel_warns_when_no_outcome_can_be_significant(ring):
    other = tdakit.load_cloud(np.random.default_rng(5).normal(size=(300, 2)))
    panel = ComparisonPanel(ring, other)
    for pieces in (2, 3):
        panel.controls["pieces"].value = pieces
        assert "no outcome can be significant" in panel.reach.value
        assert f"{2 / comb(2 * pieces, pieces):.3g}" in panel.reach.value
    panel.controls["pieces"].value = 4
    assert "no outcome" not in panel.reach.value and "0.0286" in panel.reach.value
    for pieces in range(2, 11):  # only sizes that work: every piece fits in the smaller catalogue
        panel.controls["pieces"].value = pieces
        assert panel.controls["piece_size"].max == 300 // pieces
        assert panel.controls["piece_size"].value <= 300 // pieces
        assert panel.controls["landmarks"].max == panel.controls["piece_size"].value  # never more than points


def test_comparison_panel_shows_the_null_distribution_and_clears_the_old_verdict(ring):
    other = tdakit.load_cloud(np.random.default_rng(5).normal(size=(500, 2)))
    panel = ComparisonPanel(ring, other, names=("ring", "blob"), seed=1)
    assert panel.view.image.layout.display == "none"  # a placeholder, not a broken image
    panel.controls["piece_size"].value = 100
    panel.controls["landmarks"].value = 30
    panel.controls["run"].click()
    assert panel.wait() == "done" and panel.view.value[:4] == b"\x89PNG"
    # Ring pieces against Gaussian-blob pieces: the observed split is the tightest of all 35 labelings of
    # 4 + 4 pieces, so the exact p-value is 2/70 (both labelings of the same split count; Robinson & Turner 2017).
    assert panel.result.test.exact and panel.result.test.p_value == pytest.approx(2 / 70)
    assert "p = 0.0286" in panel.actions.status.value and "p = 0.02857" in panel.verdict.value
    panel.controls["seed"].value = 2
    assert panel.view.stale and "<s>" in panel.verdict.value and "out of date" in panel.verdict.value
    panel.controls["run"].click()
    assert panel.verdict.value == "" and not panel.view.value  # the old verdict goes when a new test starts
    assert panel.wait() == "done" and "p = " in panel.verdict.value
    for term in ("loss", "p-value"):
        assert f"<b>{term}</b>" in panel.root.children[0].children[1].children[2].value
    panel.close()
