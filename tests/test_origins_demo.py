"""`basinmark origins --modes` end to end on a set made by `basinmark make-demo --phase-decides`.

The generator decides every run's product by one normal mode's starting phase (and says which mode in its
record); the analysis, reading only the files and the mode file, must rank that mode first with a
cross-validated accuracy above 0.95, and on the same set with its outcomes shuffled (labels imported into a
journal) must find nothing: accuracy inside the majority baseline's interval, permutation p above 0.05.

Counts are cut to keep it to seconds: 19 permutations (the fewest that can reach p = 0.05) and one repeat of
the folds; production uses 200 and 5 (core/origins.py).
"""

from __future__ import annotations

import json

import numpy as np
import pandas as pd
import pytest
from PIL import Image

from basinmark.cli import main
from origins_sets import make_phase_demo

FAST = ["--permutations", "19", "--repeats", "1", "-q", "--size", "640x480"]


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    return make_phase_demo(tmp_path_factory.mktemp("phase-demo"))


def _read_outputs(png):
    with Image.open(png) as im:  # reference reader: Pillow
        assert im.format == "PNG" and im.size == (640, 480)
        pixels = np.asarray(im.convert("RGB"))
    assert len(np.unique(pixels.reshape(-1, 3), axis=0)) > 20  # drawn, not blank
    table = pd.read_csv(png.with_suffix(".csv"))
    data = json.loads(png.with_suffix(".json").read_text(encoding="utf-8"))
    return table, data


def test_the_deciding_mode_is_found_from_the_files_alone(demo, tmp_path, capsys):
    root, mode = demo.root, demo.mode
    out = tmp_path / "origins.png"
    assert main(["origins", str(root), "--modes", str(root / "ts-modes.toml"), "-o", str(out)] + FAST) == 0
    printed = capsys.readouterr().out
    table, data = _read_outputs(out)
    assert len(table) == demo.runs and set(table["velocity_source"]) == {"file velocities"}
    assert f"mode {mode} phase [deg]" in table.columns
    first = data["importance"][0]
    assert first["group"] == f"mode {mode}", [row["feature"] for row in data["importance"][:5]]
    assert data["accuracy"]["value"] > 0.95
    assert data["predictable"] and data["permutation_test"]["p_value"] <= 0.05
    sentence = data["sentence"]
    assert sentence.startswith("The outcome is decided mostly by") and f"mode {mode} (" in sentence
    assert sentence in printed
    # the files carry velocities and every run starts at the one transition state: no honesty warning applies
    # (the too-few-runs one included: the rarest product has enough runs)
    assert not any("estimated" in w or "transition state" in w or "Too few" in w for w in data["warnings"])


def test_shuffled_outcomes_are_found_unpredictable(demo, tmp_path, capsys):
    root = demo.root
    rng = np.random.default_rng(4)
    products = demo.outcomes[demo.outcomes.isin(["alpha", "beta"])]
    shuffled = pd.DataFrame({"run": products.index, "label": rng.permutation(products.to_numpy())})
    shuffled.to_csv(tmp_path / "shuffled.csv", index=False)
    journal = tmp_path / "shuffled.jsonl"
    assert main(["import-labels", str(root), str(tmp_path / "shuffled.csv"), "--journal", str(journal),
                 "--as", "tester"]) == 0
    out = tmp_path / "shuffled.png"
    code = main(["origins", str(root), "--modes", str(root / "ts-modes.toml"), "-o", str(out), "--journal",
                 str(journal)] + FAST)
    assert code == 0
    printed = capsys.readouterr().out
    table, data = _read_outputs(out)
    labeled = table.dropna(subset=["outcome"])  # runs without a product have no label in this journal
    assert dict(zip(labeled["run"], labeled["outcome"])) == dict(zip(shuffled["run"], shuffled["label"]))
    lo, hi = data["baseline"]["interval"]
    assert lo <= data["accuracy"]["value"] <= hi
    assert data["permutation_test"]["p_value"] > 0.05 and not data["predictable"]
    assert data["sentence"].startswith("The outcome is not predictable from these starting conditions")
    assert data["sentence"] in printed
