"""Pictures of a comparison (stressmap/plot/indicators.py): the rose diagram's count scale and
the legend wording of the comparison map."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from numpy.testing import assert_allclose

from stressmap.plot.indicators import indicator_label, rose_counts, rose_figure


def test_rose_petals_are_counts_with_a_labelled_scale_n_and_bin_width():
    rng = np.random.default_rng(3)
    obs = np.mod(rng.normal(40.0, 12.0, 57), 180.0)
    pred = np.full(57, 45.0)
    fig = rose_figure(obs, pred, bin_deg=15.0)
    ax = fig.axes[0]
    _, counts = rose_counts(obs, bin_deg=15.0)
    # numpy.histogram is the independent count; the petals are the counts, not normalised
    ref, _ = np.histogram(obs, bins=np.arange(0.0, 181.0, 15.0))
    assert_allclose(counts, ref)
    heights = np.array([p.get_height() for p in ax.patches[: 2 * counts.size]])
    assert_allclose(heights, np.tile(ref, 2))
    # the rings are labelled in counts and reach the largest petal (the predicted one: 57)
    labels = [float(t.get_text()) for t in ax.get_yticklabels() if t.get_text()]
    assert labels and max(labels) <= 57 and ax.get_ylim()[1] >= 57
    (scale,) = [t for t in ax.texts if t.get_gid() == "rose-scale"]
    assert "n = 57" in scale.get_text() and "15\u00b0" in scale.get_text()
    assert "count" in scale.get_text()


def test_rose_says_when_the_scale_is_summed_weights():
    fig = rose_figure([10.0, 20.0], [10.0, 20.0], weight=[2.0, 0.5])
    (scale,) = [t for t in fig.axes[0].texts if t.get_gid() == "rose-scale"]
    assert "weights" in scale.get_text() and "n = 2" in scale.get_text()


@pytest.mark.parametrize("frame, expected", [
    (pd.DataFrame({"source": ["fictional demo data (stressmap)"] * 2}),
     "fictional indicators (not measurements)"),
    (pd.DataFrame({"note": ["", "FICTIONAL anomaly"]}), "fictional indicators (not measurements)"),
    (pd.DataFrame({"source": ["well A", "well B"]}), "indicator SHmax"),
    (pd.DataFrame({"lon": [1.0]}), "indicator SHmax"),
])
def test_fictional_data_is_never_called_measured(frame, expected):
    assert indicator_label(frame) == expected
    assert "measured" not in indicator_label(frame)
