"""The review's source list counts the automatic labels of the current rules without building them: the count must
be the number of labels core.review.current_auto_labels gives, whatever the outcomes hold."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from hypothesis import given
from hypothesis import strategies as st

from basinmark.core.review import current_auto_labels
from basinmark.gui.review_view import _auto_count

pytestmark = pytest.mark.gui

OUTCOME = st.one_of(st.none(), st.just(np.nan), st.just(""), st.sampled_from(["left", "right", "recrossing"]))


@given(st.lists(st.tuples(OUTCOME, st.sampled_from(["", "late_commit", "energy_drift;late_commit", None])),
                max_size=40))
def test_count_matches_the_labels_built(rows):
    cls = pd.DataFrame({"run": [f"r{i}" for i in range(len(rows))],
                        "outcome": pd.Series([o for o, _f in rows], dtype=object),
                        "flags": pd.Series([f for _o, f in rows], dtype=object)})
    assert _auto_count(cls) == len(current_auto_labels(cls))


def test_no_classification_counts_nothing():
    assert _auto_count(None) == 0 == len(current_auto_labels(None))
