"""core.report: label table CSV, summary Markdown/CSV, runs and frames to extended XYZ."""

from __future__ import annotations

import io

import ase.io
import numpy as np
import pandas as pd
import pytest
from hypothesis import given
from hypothesis import strategies as st

from basinmark.core.io import read_frames
from basinmark.core.report import (ExportError, label_export_table, write_label_table, write_run_xyz,
                                   write_summary)
from basinmark.core.sets import open_set
from basinmark.core.summary import build_summary

from gui_fixtures import toy_trajectory


def _labels() -> pd.DataFrame:
    return pd.DataFrame({
        "run": ["r1", "r2", "r3", "r4"],
        "auto_label": ["alpha", "beta", "recrossing", "alpha"],
        "hand_label": ["", "alpha", "", ""],
        "final_label": ["alpha", "alpha", "recrossing", "alpha"],
        "product_end": ["forward", "backward", "", "forward"],
        "product_final_entry_fs": [42.5, 18.0, np.nan, 99.25],
        "flags": ["", "late_commit;several_visits", "", "energy_drift"],
        "labeler": ["", "quill", "", ""],
        "reason": ["", "forms the ring, then, \"wobbles\"", "", ""],
        "data_changed": [False, True, False, False],
    })


def test_label_table_csv_reloads_to_the_same_table(tmp_path):
    labels = _labels()
    path = write_label_table(labels, tmp_path / "labels.csv")
    back = pd.read_csv(path, keep_default_na=False, na_values=[""])
    want = label_export_table(labels)
    assert list(back.columns) == list(want.columns)
    assert back["run"].tolist() == want["run"].tolist()
    assert back["final_label"].tolist() == want["final_label"].tolist()
    assert back["reason"].fillna("").tolist() == want["reason"].tolist()  # commas and quotes survive
    np.testing.assert_allclose(back["product_final_entry_fs"], want["product_final_entry_fs"])
    assert back["product_end"].fillna("").tolist() == want["product_end"].tolist()
    # the commit columns follow the labels, named by the end they belong to
    assert want.columns[6:8].tolist() == ["product_end", "product_final_entry_fs"]
    assert back["data_changed"].tolist() == want["data_changed"].tolist()
    assert label_export_table(labels).columns[0:3].tolist() == ["run", "final_label", "auto_label"]


@given(st.lists(st.tuples(st.text(alphabet=st.characters(blacklist_categories=("Cs",), blacklist_characters="\r"),
                                  min_size=1, max_size=12),
                          st.sampled_from(["alpha", "beta", "unfinished", ""]),
                          st.floats(-500, 500, allow_nan=False)), min_size=1, max_size=20, unique_by=lambda t: t[0]))
def test_label_csv_round_trip_property(rows):
    labels = pd.DataFrame({"run": [r[0] for r in rows], "final_label": [r[1] for r in rows],
                           "product_final_entry_fs": [abs(r[2]) for r in rows]})
    buf = io.StringIO(label_export_table(labels).to_csv(index=False))
    # read as text and convert with numpy: pandas' default fast float parser is not exact (it read
    # 100.72813570917981 as 100.728135709), and the check is of what we write, not of that parser
    back = pd.read_csv(buf, keep_default_na=False, dtype=str)
    assert back["run"].tolist() == labels["run"].tolist()
    assert back["final_label"].tolist() == labels["final_label"].tolist()
    np.testing.assert_allclose(back["product_final_entry_fs"].to_numpy(dtype=float), labels["product_final_entry_fs"],
                               rtol=1e-12)


def test_summary_markdown_and_csv(tmp_path):
    summary = build_summary(_labels(), ["alpha", "beta"], "alpha", "beta", ddg=1.0)
    md = write_summary(summary, tmp_path / "s.md").read_text(encoding="utf-8")
    assert md == summary.to_markdown()
    assert "### Warnings" in md  # 3 reactive runs: the summary says the ratio is a rough guide
    csv_path = write_summary(summary, tmp_path / "s.csv")
    back = pd.read_csv(csv_path)
    want = summary.to_frame()
    assert back["quantity"].tolist() == want["quantity"].tolist()
    np.testing.assert_allclose(back["value"].astype(float), want["value"].astype(float))
    with pytest.raises(ExportError, match="suffix"):
        write_summary(summary, tmp_path / "s.docx")


def test_run_xyz_reads_back_with_ase_and_our_reader(tmp_path):
    traj = toy_trajectory("toy-007", "right")
    path = write_run_xyz(traj, tmp_path / "toy-007.xyz")
    frames = ase.io.read(path, index=":")  # reference reader: ase.io (extended XYZ)
    assert len(frames) == traj.n_frames
    np.testing.assert_allclose(np.stack([a.positions for a in frames]), traj.positions, atol=1e-4)
    assert [a.info["time"] for a in frames] == pytest.approx(traj.times.tolist())
    assert frames[0].info["run"] == "toy-007"
    block = read_frames(path)
    np.testing.assert_allclose(block.positions, traj.positions, atol=1e-4)
    np.testing.assert_allclose(block.info["epot"], traj.energies["potential"], rtol=1e-12)
    np.testing.assert_array_equal(block.numbers, traj.numbers)


def test_frame_xyz_and_bad_frame(tmp_path):
    traj = toy_trajectory("toy-001", "left")
    path = write_run_xyz(traj, tmp_path / "f.xyz", frame=traj.ts_index)
    atoms = ase.io.read(path)
    np.testing.assert_allclose(atoms.positions, traj.positions[traj.ts_index], atol=1e-4)
    assert atoms.info["time"] == pytest.approx(0.0)
    assert atoms.info["frame"] == traj.ts_index + 1
    with pytest.raises(ExportError, match="frames 1 to 81"):
        write_run_xyz(traj, tmp_path / "g.xyz", frame=81)
    with pytest.raises(ExportError, match="does not exist"):
        write_run_xyz(traj, tmp_path / "no" / "such.xyz")


def test_exported_run_opens_as_a_set(tmp_path):
    traj = toy_trajectory("toy-003", "recrossing")
    root = tmp_path / "reopened"
    root.mkdir()
    write_run_xyz(traj, root / "toy-003.xyz")
    tset = open_set(root, use_cache=False)
    back = tset["toy-003"]
    np.testing.assert_allclose(back.positions, traj.positions, atol=1e-4)
    np.testing.assert_allclose(back.times, traj.times)
    np.testing.assert_allclose(back.energies["total"], traj.energies["total"], rtol=1e-9)
