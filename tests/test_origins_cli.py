"""`basinmark origins`: the map as PNG/SVG, the table as CSV, the analysis as JSON; the map's boundary."""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest
from origins_sets import write_doubtful_set, write_toy_set
from PIL import Image

from basinmark.cli import main


@pytest.fixture(scope="module")
def toy_root(tmp_path_factory):
    root = tmp_path_factory.mktemp("origins") / "toy"
    outcome = write_toy_set(root, n=40, seed=1)
    return root, outcome


def test_origins_writes_png_csv_and_json(toy_root, tmp_path, capsys):
    root, outcome = toy_root
    out = tmp_path / "origins.png"
    code = main(["origins", str(root), "-o", str(out), "--size", "640x480", "--permutations", "19", "--repeats",
                 "1", "-q", "--no-cache"])
    assert code == 0
    with Image.open(out) as im:  # reference reader: Pillow
        assert im.format == "PNG" and im.size == (640, 480)
        pixels = np.asarray(im.convert("RGB"))
    assert len(np.unique(pixels.reshape(-1, 3), axis=0)) > 20  # drawn, not blank
    table = pd.read_csv(tmp_path / "origins.csv")
    assert len(table) == 40 and set(table["velocity_source"]) == {"file velocities"}
    # the outcomes come from the rules' classification of the files: the generator's own outcomes
    assert dict(zip(table["run"], table["outcome"])) == outcome
    data = json.loads((tmp_path / "origins.json").read_text(encoding="utf-8"))
    assert data["importance"][0]["coordinate"] == "dr_bc/dt [angstrom/fs]"
    assert data["permutation_test"]["permutations"] == 19
    assert len(data["runs"]) == 40 and data["sentence"].startswith("The outcome is decided mostly by")
    assert data["regularisation"]["C"] == "chosen by inner cross-validation"
    assert len(data["regularisation"]["chosen_C"]) == 5 and data["settings"]["inner_folds"] == 3
    printed = capsys.readouterr()
    assert "decided mostly by the rate of change of r_bc" in printed.out
    assert "chosen in every training fold by an inner 3-fold cross-validation" in printed.out
    assert "not yet classified" in printed.err  # outcomes from an in-memory classification: said so


def test_origins_svg_and_chosen_axes_and_bad_axis(toy_root, tmp_path, capsys):
    root, _ = toy_root
    out = tmp_path / "o.svg"
    assert main(["origins", str(root), "-o", str(out), "--x", "r_ab [angstrom]", "--y", "r_cd [angstrom]",
                 "--permutations", "3", "--repeats", "1", "-q", "--csv", str(tmp_path / "t.csv"),
                 "--json", str(tmp_path / "a.json"), "--fixed-c", "0.5"]) == 0
    assert out.read_text(encoding="utf-8").lstrip().startswith("<?xml")
    fixed = json.loads((tmp_path / "a.json").read_text(encoding="utf-8"))["regularisation"]
    assert fixed["C"] == 0.5 and set(fixed["chosen_C"]) == {0.5} and "fixed" in fixed["sentence"]
    assert (tmp_path / "t.csv").is_file() and (tmp_path / "a.json").is_file()
    code = main(["origins", str(root), "-o", str(tmp_path / "x.png"), "--x", "nope", "--permutations", "3",
                 "--repeats", "1", "-q"])
    assert code == 2
    assert "no coordinate 'nope'" in capsys.readouterr().err


def test_boundary_lines_lie_on_the_classifier_decision_boundary():
    # reference: scikit-learn's own decision_function is zero on the boundary of a two-class model
    from sklearn.linear_model import LogisticRegression

    from basinmark.gui.origins_view import boundary_grid, boundary_lines

    rng = np.random.default_rng(4)
    X = rng.normal(0, 1, (200, 2)) * [3.0, 0.5]
    y = np.where(X[:, 0] / 3 + 2 * X[:, 1] + rng.normal(0, 0.3, 200) > 0.2, "b", "a")
    model = LogisticRegression().fit(X, y)
    xs, ys, proba = boundary_grid(model, X[:, 0], X[:, 1], ["a", "b"], n=80)
    lx, ly = boundary_lines(xs, ys, proba)
    pts = np.column_stack([lx, ly])
    pts = pts[np.isfinite(pts).all(axis=1)]
    assert len(pts) > 20
    margin = model.decision_function(pts)
    scale = np.ptp(model.decision_function(X))
    assert np.max(np.abs(margin)) < 1e-3 * scale  # linear interpolation of a near-linear margin: nearly exact
    assert pts[:, 0].min() < xs[10] and pts[:, 0].max() > xs[-10] or np.ptp(pts[:, 1]) > 0.8 * np.ptp(ys)


def test_every_honesty_warning_is_printed_and_written(tmp_path, capsys):
    root = tmp_path / "doubtful"
    write_doubtful_set(root)  # no velocity column, one run started 2 Å away, 8 runs of the rarer product
    out = tmp_path / "o.png"
    assert main(["origins", str(root), "-o", str(out), "--permutations", "19", "--repeats", "1", "--fixed-c", "1",
                 "-q", "--no-cache"]) == 0
    printed = capsys.readouterr().out
    warnings = json.loads(out.with_suffix(".json").read_text(encoding="utf-8"))["warnings"]
    for start in ("Too few runs for the classifier to mean much: the rarest outcome has",
                  "Starting velocities were estimated, not read: 18 of 18 runs",
                  "The runs were not all started at one transition state: 1 of 18"):
        assert any(w.startswith(start) for w in warnings), start
        assert f"warning: {start}" in printed
    assert "run-002" in next(w for w in warnings if "one transition state" in w)
    table = pd.read_csv(out.with_suffix(".csv"))
    assert set(table["velocity_source"]) != {"file velocities"}
    assert table.set_index("run").loc["run-002", "ts_rmsd [angstrom]"] > 0.5


def test_too_few_runs_for_any_classifier_is_said_and_fails(tmp_path, capsys):
    root = tmp_path / "tiny"
    write_toy_set(root, n=8, seed=1)  # fewer runs of the rarer product than the 5 folds
    out = tmp_path / "o.png"
    assert main(["origins", str(root), "-o", str(out), "--permutations", "19", "--repeats", "1", "-q",
                 "--no-cache"]) == 1
    printed = capsys.readouterr().out
    assert "The outcome was not analysed: Too few runs for the classifier to mean anything" in printed
    assert "warning: Too few runs for the classifier to mean anything" in printed
    assert out.is_file()  # the map of the points is still drawn, without a boundary
