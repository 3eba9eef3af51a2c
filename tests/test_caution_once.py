"""The caution (stressmap.constants.CAUTION) is said once: no output follows it with a sentence
that repeats it (site-specific studies, codes, licensed professionals)."""

from __future__ import annotations

import re

from stressmap import CAUTION
from stressmap.analyses import wells
from stressmap.plot import screening as plot_screening

_REPEATS = re.compile(r"site-specific|local codes|licensed|professional judgement", re.I)


def test_caution_names_each_point_once():
    assert len(_REPEATS.findall(CAUTION)) == 3  # site-specific, local codes, licensed


def test_well_note_adds_only_what_the_caution_does_not_say():
    assert not _REPEATS.search(wells.WELL_NOTE)
    assert "not a well design" in wells.WELL_NOTE


def test_screening_footer_ends_with_the_caution():
    assert plot_screening.footer_text().endswith(CAUTION)
    assert len(_REPEATS.findall(plot_screening.footer_text())) == 3
