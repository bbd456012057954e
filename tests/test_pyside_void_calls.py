"""Regression: PySide6 6.12.0 on Python 3.11 leaked a reference to None on every call of a
void Qt method and aborted the process ("none_dealloc") after a few hundred thousand calls.
pyproject.toml keeps that combination out; this test calls a void painter method 400,000
times in a child process and checks that the child exits cleanly."""

import subprocess
import sys
import textwrap

import pytest

pytest.importorskip("PySide6")


def test_many_void_painter_calls_do_not_abort():
    code = textwrap.dedent(
        """
        import os, sys
        os.environ.setdefault('QT_QPA_PLATFORM', 'offscreen')
        from PySide6.QtGui import QGuiApplication, QImage, QPainter
        from PySide6.QtCore import QPointF
        app = QGuiApplication([])
        img = QImage(64, 64, QImage.Format_ARGB32)
        p = QPainter(img)
        before = sys.getrefcount(None)
        pt = QPointF(1.0, 1.0)
        for _ in range(400_000):
            p.drawPoint(pt)      # a void method
        p.end()
        print('ok', sys.getrefcount(None) - before)
        """
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=300)
    assert out.returncode == 0, f"child died ({out.returncode}): {out.stderr[-2000:]}"
    assert out.stdout.startswith("ok")
