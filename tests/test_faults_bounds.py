"""Work asked for on the command line has bounds, said with the allowed range before anything runs."""

from __future__ import annotations

import pytest

from basinmark.cli import main
from basinmark.commands._bounds import MAX_DEMO_RUNS, MAX_MOVIE_FRAMES, MAX_SWEEP_STEPS
from test_faults import build_set

SWEEP = ["sweep", "{set}", "--basin", "alpha", "--monitor", "r_a", "--bound", "below", "--from", "1.5", "--to",
         "2.0"]


@pytest.fixture(scope="module")
def tset(tmp_path_factory):
    return build_set(tmp_path_factory.mktemp("bounds") / "twinpath")


@pytest.mark.parametrize("extra, words", [
    (["--steps", "1000000"], f"1000000 is outside the allowed range 1 to {MAX_SWEEP_STEPS}"),
    (["--steps", "0"], f"0 is outside the allowed range 1 to {MAX_SWEEP_STEPS}"),
    (["--steps", "2.5"], f"'2.5' is not a whole number (allowed: 1 to {MAX_SWEEP_STEPS})"),
    (["--steps", "5", "--from", "nan"], "nan is outside the allowed range: any finite number"),
    (["--steps", "5", "--to", "inf"], "inf is outside the allowed range: any finite number"),
])
def test_sweep_steps_and_values_are_bounded(tset, capsys, extra, words):
    argv = [a.replace("{set}", str(tset)) for a in SWEEP] + extra
    code = main(argv)
    err = capsys.readouterr().err
    assert code == 2 and words in err and "Traceback" not in err, err
    assert "--steps" in err or "--from" in err or "--to" in err


def test_a_sweep_inside_the_bounds_runs(tset, capsys):
    argv = [a.replace("{set}", str(tset)) for a in SWEEP] + ["--steps", str(MAX_SWEEP_STEPS), "--format", "csv"]
    assert main(argv) == 0
    assert len(capsys.readouterr().out.strip().splitlines()) == 1 + MAX_SWEEP_STEPS


@pytest.mark.parametrize("argv, words", [
    (["make-demo", "{tmp}", "--runs", str(MAX_DEMO_RUNS + 1)], f"outside the allowed range 1 to {MAX_DEMO_RUNS}"),
    (["make-demo", "{tmp}", "--max-time", "1e9"], "outside the allowed range: more than 0 to 20000"),
    (["make-demo", "{tmp}", "--temperature", "-3"], "outside the allowed range: more than 0 to 5000"),
    (["movie", "{set}", "t00", "-o", "{tmp}/m.gif", "--fps", "0"], "outside the allowed range: more than 0 to 100"),
])
def test_other_bounds_say_the_range(tset, tmp_path, capsys, argv, words):
    argv = [a.replace("{set}", str(tset)).replace("{tmp}", str(tmp_path)) for a in argv]
    code = main(argv)
    err = capsys.readouterr().err
    assert code == 2 and words in err and "Traceback" not in err, err
    assert list(tmp_path.iterdir()) == []  # nothing was started


def test_movie_frame_count_is_bounded(tset, tmp_path, capsys, monkeypatch):
    import basinmark.commands.media as media

    monkeypatch.setattr(media, "MAX_MOVIE_FRAMES", 10)  # the toy runs are short; the rule is the same
    code = main(["movie", str(tset), "t00", "-o", str(tmp_path / "m.gif"), "--no-cache"])
    err = capsys.readouterr().err
    assert code == 2 and "at most 10 frames" in err and "--frames A:B" in err, err
    assert not (tmp_path / "m.gif").exists()
    assert MAX_MOVIE_FRAMES >= 1000


def test_map_size_is_bounded(tset, tmp_path, capsys):
    from basinmark.gui.figures import MAX_FIGURE_SIDE

    code = main(["map", str(tset), "-o", str(tmp_path / "m.png"), "--size", "20000x20000"])
    err = capsys.readouterr().err
    assert code == 2 and f"out of range (16 to {MAX_FIGURE_SIDE} each)" in err and "Traceback" not in err
    assert not (tmp_path / "m.png").exists()
