"""Opening set folders: discovery, joining halves, manifest, cache, failures collected."""

from __future__ import annotations

import gzip
from pathlib import Path

import numpy as np
import pytest
from ase import Atoms
from ase.io import write

from basinmark.core import sets as sets_mod
from basinmark.core.sets import discover, open_set
from basinmark.core.units import energy_factor


def _frames(n, times, shift=0.0, symbols="CHHO"):
    out = []
    rng = np.random.default_rng(7)
    base = rng.normal(size=(len(symbols), 3))
    for i, t in enumerate(times):
        a = Atoms(symbols, positions=base + shift * i)
        a.info["time"] = float(t)
        a.info["epot"] = -1.0 + 0.01 * i
        a.info["ekin"] = 0.5 - 0.01 * i
        out.append(a)
    return out


def write_run(folder: Path, run_id: str, n_bwd=5, n_fwd=7, dt=0.5, gz=True, symbols="CHHO"):
    folder.mkdir(parents=True, exist_ok=True)
    bwd = _frames(n_bwd, -dt * np.arange(n_bwd), shift=-0.01, symbols=symbols)
    fwd = _frames(n_fwd, dt * np.arange(n_fwd), shift=+0.01, symbols=symbols)
    for name, frames in (("bwd", bwd), ("fwd", fwd)):
        path = folder / f"{run_id}.{name}.xyz"
        write(path, frames, format="extxyz")
        if gz:
            data = path.read_bytes()
            path.unlink()
            with gzip.GzipFile(folder / f"{run_id}.{name}.xyz.gz", "wb", mtime=0) as fh:
                fh.write(data)
    return bwd, fwd


def test_halves_are_joined_around_t0(tmp_path):
    bwd, fwd = write_run(tmp_path / "runs", "run-0001", n_bwd=5, n_fwd=7, dt=0.5)
    tset = open_set(tmp_path, use_cache=False)
    assert tset.failures == []
    t = tset["run-0001"]
    assert t.n_frames == 5 + 7 - 1  # the t = 0 frame is shared
    np.testing.assert_allclose(t.times, np.arange(-4, 7) * 0.5)
    assert t.ts_index == 4
    np.testing.assert_allclose(t.positions[0], bwd[-1].positions, atol=1e-5)  # earliest = end of backward half
    np.testing.assert_allclose(t.positions[-1], fwd[-1].positions, atol=1e-5)
    assert t.symbols == ["C", "H", "H", "O"]
    assert set(t.energies) == {"potential", "kinetic", "total"}
    np.testing.assert_allclose(t.energies["total"], 0.5 - 1.0, atol=1e-9)
    assert [s.role for s in t.sources] == ["backward", "forward"]


def test_backward_half_with_positive_elapsed_times(tmp_path):
    folder = tmp_path
    bwd = _frames(4, 2.0 * np.arange(4))  # elapsed times, positive
    fwd = _frames(4, 2.0 * np.arange(4))
    write(folder / "a.bwd.xyz", bwd, format="extxyz")
    write(folder / "a.fwd.xyz", fwd, format="extxyz")
    t = open_set(folder, use_cache=False)["a"]
    np.testing.assert_allclose(t.times, [-6, -4, -2, 0, 2, 4, 6])


def test_joined_single_file_runs(tmp_path):
    frames = _frames(9, np.arange(-4, 5) * 1.0)
    write(tmp_path / "run-7.xyz", frames, format="extxyz")
    tset = open_set(tmp_path, use_cache=False)
    assert tset.run_ids == ["run-7"]
    assert tset["run-7"].time_span == (-4.0, 4.0)


def test_bad_files_are_listed_and_the_rest_loads(tmp_path):
    write_run(tmp_path, "run-1", gz=False)
    write_run(tmp_path, "run-2", gz=False)
    write_run(tmp_path, "run-3", gz=False, symbols="CHHN")
    # run-3: make the halves disagree in elements
    fwd = _frames(4, np.arange(4) * 0.5, symbols="CHHO")
    write(tmp_path / "run-3.fwd.xyz", fwd, format="extxyz")
    # run-4: forward half only
    write(tmp_path / "run-4.fwd.xyz", fwd, format="extxyz")
    # run-5: garbage coordinates
    (tmp_path / "run-5.bwd.xyz").write_text("2\n\nC 0 0 0\nH x 0 0\n")
    write(tmp_path / "run-5.fwd.xyz", fwd[:1], format="extxyz")
    tset = open_set(tmp_path, use_cache=False)
    assert tset.run_ids == ["run-1", "run-2"]
    reasons = " | ".join(str(f) for f in tset.failures)
    assert "run-3" in reasons and "do not match" in reasons
    assert "run-5.bwd.xyz, line 4" in reasons
    # a lone half is not a run: left out with the reason, not counted as a failure to load
    assert [Path(f.path).name for f in tset.left_out] == ["run-4.fwd.xyz"]
    assert "no backward half" in tset.left_out[0].reason
    table = tset.info_table()
    assert len(table) == 5 and table["problems"].str.contains("not loaded").sum() == 2
    assert table["problems"].str.startswith("left out").sum() == 1


def test_cache_hit_skips_parsing_and_changed_file_misses(tmp_path, monkeypatch):
    write_run(tmp_path, "run-1")
    first = open_set(tmp_path)
    assert (tmp_path / ".basinmark-cache").is_dir()

    def boom(*a, **k):
        raise AssertionError("parsed although cached")

    monkeypatch.setattr(sets_mod, "_join", boom)
    second = open_set(tmp_path)
    np.testing.assert_array_equal(first["run-1"].positions, second["run-1"].positions)
    assert first["run-1"].content_hash == second["run-1"].content_hash
    monkeypatch.undo()
    # change one half: the content hash and the cache key change, the run is parsed again
    write_run(tmp_path, "run-1", n_fwd=9)
    third = open_set(tmp_path)
    assert third["run-1"].n_frames == 5 + 9 - 1
    assert third["run-1"].content_hash != first["run-1"].content_hash


def test_manifest_patterns_and_units(tmp_path):
    bwd = _frames(3, -0.001 * np.arange(3))  # ps
    fwd = _frames(3, 0.001 * np.arange(3))
    write(tmp_path / "traj_12_back.xyz", bwd, format="extxyz")
    write(tmp_path / "traj_12_front.xyz", fwd, format="extxyz")
    (tmp_path / "basinmark-set.toml").write_text(
        'name = "custom"\n[files]\nbackward = "traj_{run}_back.xyz"\nforward = "traj_{run}_front.xyz"\n'
        '[units]\ntime = "ps"\nenergy = "kcal/mol"\n')
    tset = open_set(tmp_path, use_cache=False)
    assert tset.name == "custom"
    t = tset["12"]
    np.testing.assert_allclose(t.times, [-2, -1, 0, 1, 2])
    # energies converted from kcal/mol to eV (ase.units: 1 kcal/mol = 0.0433641 eV, reference library)
    np.testing.assert_allclose(t.energies["potential"][2], -1.0 * energy_factor("kcal/mol"))
    assert abs(energy_factor("kcal/mol") - 0.0433641) < 1e-6


def test_manifest_errors_are_plain(tmp_path):
    (tmp_path / "basinmark-set.toml").write_text('[units]\ntime = "weeks"\n')
    with pytest.raises(Exception, match="basinmark-set.toml.*unknown time unit"):
        discover(tmp_path)
    (tmp_path / "basinmark-set.toml").write_text('[filez]\n')
    with pytest.raises(Exception, match="unknown key 'filez'"):
        discover(tmp_path)


def test_progress_and_cancel(tmp_path):
    for i in range(6):
        write_run(tmp_path, f"run-{i}", gz=False)
    seen = []
    tset = open_set(tmp_path, progress=lambda d, n, r: seen.append((d, n)), use_cache=False, workers=1)
    assert seen[0] == (0, 6) and seen[-1] == (6, 6) and len(tset) == 6
    calls = []
    tset = open_set(tmp_path, use_cache=False, workers=1, cancel=lambda: len(calls.append(1) or calls) >= 2)
    assert len(tset) < 6 and "cancelled" in tset.warnings[0]


def test_missing_folder_message(tmp_path):
    with pytest.raises(Exception, match="no such folder"):
        open_set(tmp_path / "nope")


def test_set_snapshot_keeps_failures_and_shares_one_positions_array(tmp_path, monkeypatch):
    write_run(tmp_path, "run-1")
    write_run(tmp_path, "run-2")
    (tmp_path / "run-3.bwd.xyz").write_text("2\n\nC 0 0 0\nH nan 0 0\n")
    write(tmp_path / "run-3.fwd.xyz", _frames(2, [0.0, 0.5]), format="extxyz")
    first = open_set(tmp_path)
    assert first.run_ids == ["run-1", "run-2"] and len(first.failures) == 1
    assert list((tmp_path / ".basinmark-cache").glob("seg-*"))
    monkeypatch.setattr(sets_mod, "_parsed", lambda *a, **k: (_ for _ in ()).throw(AssertionError("parsed")))
    again = open_set(tmp_path)
    assert again.run_ids == first.run_ids
    assert [str(f) for f in again.failures] == [str(f) for f in first.failures]
    a, b = again["run-1"].positions, again["run-2"].positions
    def root(x):
        while isinstance(getattr(x, "base", None), np.ndarray) or hasattr(getattr(x, "base", None), "base"):
            x = x.base
        return x.base if x.base is not None else x

    assert root(a) is root(b)  # both runs are views of the one cached positions array (stored once)
    assert not a.flags.writeable
    np.testing.assert_array_equal(a, first["run-1"].positions)
    assert again["run-1"].content_hash == first["run-1"].content_hash
    assert again["run-1"].energies.keys() == first["run-1"].energies.keys()


def test_segment_written_once_even_when_two_opens_race(tmp_path):
    from basinmark.core import set_cache

    write_run(tmp_path, "run-1")
    tset = open_set(tmp_path, use_cache=False)
    folder = tmp_path / ".basinmark-cache"
    runs = list(tset.runs.values())
    assert set_cache.store_segment(folder, "k", runs, [], {}) > 0
    assert set_cache.store_segment(folder, "k", runs, [], {}) == 0  # the second writer finds the entry there
    assert [p.name for p in folder.iterdir()] == ["seg-k"]  # no temporary folder left behind
    again, failures = set_cache.load_segment(folder, "k")
    np.testing.assert_array_equal(again[0].positions, tset["run-1"].positions)


def test_a_copied_set_names_its_own_files_even_from_the_cache(tmp_path):
    import shutil

    first = tmp_path / "one"
    write_run(first, "run-1")
    (first / "run-2.bwd.xyz").write_text("2\n\nC 0 0 0\nH x 0 0\n")
    write(first / "run-2.fwd.xyz", _frames(2, [0.0, 0.5]), format="extxyz")
    open_set(first)  # fills the cache
    second = tmp_path / "two"
    shutil.copytree(first, second)  # the cache comes along
    again = open_set(second)
    assert all(str(s.path).startswith(str(second.resolve())) for s in again["run-1"].sources)
    assert str(second) in str(again.failures[0]) and str(first) + "/" not in str(again.failures[0])


def test_backward_half_listed_from_its_far_end_is_turned_round(tmp_path):
    bwd, fwd = _frames(4, -0.5 * np.arange(4), shift=-0.01), _frames(5, 0.5 * np.arange(5), shift=0.01)
    write(tmp_path / "a.bwd.xyz", bwd[::-1], format="extxyz")  # times -1.5, -1.0, -0.5, 0
    write(tmp_path / "a.fwd.xyz", fwd, format="extxyz")
    t = open_set(tmp_path, use_cache=False)["a"]
    np.testing.assert_allclose(t.times, 0.5 * np.arange(-3, 5))
    np.testing.assert_allclose(t.positions[0], bwd[-1].positions, atol=1e-5)  # the far end comes first
    np.testing.assert_allclose(t.positions[3], fwd[0].positions, atol=1e-5)   # the TS at t = 0
    assert any("read in reverse" in p for p in t.problems)


def test_odd_runs_are_named(tmp_path):
    write_run(tmp_path, "run-1")
    write_run(tmp_path, "run-2", symbols="CHHN")
    tset = open_set(tmp_path, use_cache=False)
    assert "run-2" in tset.warnings[0] and "other atoms" in tset.warnings[0]
    assert any("atoms differ" in p for p in tset["run-2"].problems)
    # a joined run without negative times says that it has no backward half
    write(tmp_path / "late.xyz", _frames(3, [100.0, 101.0, 102.0]), format="extxyz")
    assert any("no frame at or before t = 0" in p for p in open_set(tmp_path, use_cache=False)["late"].problems)
