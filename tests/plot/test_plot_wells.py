"""Pictures of well screening read cleanly: pole names whole and apart, the legend off the curves."""

from __future__ import annotations

import numpy as np
import pytest

from stressmap.analyses import wells
from stressmap.formats.wells import json_document
from stressmap.plot import wells as pw
from stressmap.plot.labels import label_boxes_overlap, text_box

SITE = {"site": [-15.0, -20.0], "depth_km": 3.0, "regime": "strike-slip",
        "shmax_azimuth_deg": 40.0}


@pytest.fixture(scope="module")
def net_doc():
    # one fault traced in three segments (three poles, one name) and planes whose poles crowd
    planes = ([{"strike_deg": 300.0 + 5 * i, "dip_deg": 65.0, "name": "Long fault name (fictional)"}
               for i in range(3)]
              + [{"strike_deg": 2.0 + i, "dip_deg": 80.0, "name": f"Splay {i} (fictional)"}
                 for i in range(4)])
    req = wells.parse_well_request({**SITE, "planes": planes})
    return json_document(wells.run_net(req, size=61))


def test_net_names_each_fault_once_whole_and_without_overlaps(net_doc):
    fig = pw.net_figure(net_doc)
    ax = fig.axes[0]
    labels = [a for a in ax.get_children() if a.get_gid() == "pole-label"]
    texts = sorted(t.get_text() for t in labels)
    assert texts == sorted(["Long fault name (fictional)"] + [f"Splay {i} (fictional)"
                                                              for i in range(4)])
    fig.canvas.draw()
    boxes = [text_box(t) for t in labels]
    assert not label_boxes_overlap(boxes)
    # the N, E, S, W letters stay readable
    compass = [text_box(t) for t in ax.texts if t.get_text() in "NESW"]
    assert len(compass) == 4 and not label_boxes_overlap(boxes + compass)


def test_profile_legend_covers_no_curve():
    req = wells.parse_well_request({**SITE, "profile": {"max_depth_km": 5.0}})
    fig = pw.profile_figure(json_document(wells.run_profile(req)))
    ax = fig.axes[0]
    fig.canvas.draw()
    x0, y0, x1, y1 = ax.get_legend().get_window_extent().extents
    for line in ax.get_lines():
        pts = ax.transData.transform(line.get_xydata()) if len(line.get_xdata()) else np.zeros((0, 2))
        inside = (pts[:, 0] > x0) & (pts[:, 0] < x1) & (pts[:, 1] > y0) & (pts[:, 1] < y1)
        assert not inside.any(), line.get_label()
