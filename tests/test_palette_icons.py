"""Toolbar icons look different from one another (Undo Label and Reset View most of all)."""

from __future__ import annotations

import itertools

import numpy as np
import pytest
from PySide6.QtCore import QSize
from PySide6.QtGui import QIcon

from basinmark.gui.icons import icon, icon_names

pytestmark = pytest.mark.gui

SIZE = 24


def _ink(qicon: QIcon) -> np.ndarray:
    """Where the icon is drawn (alpha > half), as a boolean SIZE×SIZE mask."""
    img = qicon.pixmap(QSize(SIZE, SIZE)).toImage().scaled(SIZE, SIZE)
    return np.array([[img.pixelColor(x, y).alpha() > 127 for x in range(SIZE)] for y in range(SIZE)])


def _differ(a: np.ndarray, b: np.ndarray) -> float:
    """Share of the inked pixels (of either icon) that only one of them inks (0 = same drawing)."""
    return float((a ^ b).sum()) / max(1, int((a | b).sum()))


def test_undo_label_and_reset_view_have_distinct_icons(qapp):
    from basinmark.gui.actions import ACTIONS

    by_name = {spec.name: spec.icon for spec in ACTIONS}
    assert by_name["undo_label"] != by_name["reset_view"]
    assert _differ(_ink(icon(by_name["undo_label"])), _ink(icon(by_name["reset_view"]))) > 0.5


def test_no_two_icons_draw_nearly_the_same(qapp):
    inks = {name: _ink(icon(name)) for name in icon_names()}
    close = [(a, b) for a, b in itertools.combinations(inks, 2) if _differ(inks[a], inks[b]) < 0.2]
    assert not close, f"icons that look alike: {close}"
