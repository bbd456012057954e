"""A set whose run folder is a symbolic link to storage elsewhere (runs kept on a scratch disk, linked into the
project folder): every file is found once.

The set folder itself was listed with its sub-folders, and the linked folder again as a place to look (``runs``,
resolved to where it points): every file was seen twice, and all 20,000 files of a 10,000-run set were "left out"
as second halves of runs that already had one, in a banner across the window."""

from __future__ import annotations

import os

import pytest

from basinmark.core.quick_open import full_check, quick_open
from basinmark.core.sets import discover, open_set

from gui_fixtures import make_toy_set

OUTCOMES = ["left", "right", "recrossing", "left"]


@pytest.fixture
def linked(tmp_path):
    if not hasattr(os, "symlink"):
        pytest.skip("no symbolic links here")
    store = make_toy_set(tmp_path / "scratch", OUTCOMES)   # the runs, where the dynamics wrote them
    project = tmp_path / "project"
    project.mkdir()
    (project / "runs").symlink_to(store, target_is_directory=True)
    (project / "basins.toml").write_bytes((store / "basins.toml").read_bytes())
    return store, project


def test_each_file_of_a_linked_run_folder_is_found_once(linked):
    store, project = linked
    here, there = discover(project), discover(store)
    assert len(here.runs) == len(there.runs) == len(OUTCOMES)
    assert here.left_out == [] and there.left_out == []


def test_a_linked_run_folder_opens_whole_and_quickly_again(linked):
    _store, project = linked
    tset = open_set(project)
    assert len(tset) == len(OUTCOMES) and not tset.failures
    assert full_check(project).recorded   # what the window does after an open, so that the next one is quick
    again = quick_open(project)
    assert again is not None and len(again.tset) == len(OUTCOMES)
