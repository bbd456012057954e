"""Test configuration: Qt always offscreen (set here, not only in the Makefile)."""

import os

os.environ.setdefault("QT_QPA_PLATFORM", "offscreen")
os.environ.setdefault("QT_QUICK_BACKEND", "software")
# journal witnesses go to a throw-away folder, never the tester's own state folder
if not os.environ.get("BASINMARK_STATE_DIR"):
    import tempfile

    os.environ["BASINMARK_STATE_DIR"] = tempfile.mkdtemp(prefix="basinmark-test-state-")

from hypothesis import HealthCheck, settings  # noqa: E402

settings.register_profile("ci", deadline=None, suppress_health_check=[HealthCheck.too_slow], max_examples=60)
settings.load_profile("ci")

# the window asks before losing unsaved rule edits (quit, open another set); tests answer "discard" unless they
# test the question itself (tests/test_rules_roundtrip_gui.py removes this and patches the message box)
os.environ.setdefault("BASINMARK_UNSAVED_RULES", "discard")


# Garbage is collected only between tests, never in the middle of a Qt signal: a collection there once destroyed
# a widget left over from an earlier test inside Qt's own dispatch and the worker waited forever on a Qt lock
# (see src/basinmark/gui/gc_guard.py, which does the same for the application with a GUI-thread timer).
import gc  # noqa: E402

import pytest  # noqa: E402


@pytest.fixture(scope="session", autouse=True)
def _no_automatic_gc():
    gc.disable()
    yield
    gc.enable()


@pytest.fixture(autouse=True)
def _collect_between_tests():
    gc.disable()  # again: a library switching it back on must not reopen the hang
    yield
    gc.unfreeze()  # what a window froze (src/basinmark/gui/gc_guard.py) is collected too
    gc.collect()
