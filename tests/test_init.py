"""`basinmark init`: what it finds in a folder, the files it writes, and rules that classify like the bundled ones."""

from __future__ import annotations

import shutil
import sys
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from basinmark.cli import main
from basinmark.core.init_propose import otsu_split

SAMPLE = Path(__file__).resolve().parents[1] / "sample_sets" / "ringfork"


@pytest.fixture(scope="module")
def bare_sample(tmp_path_factory):
    """The bundled set copied without its rules and manifest, as a chemist's first folder would be."""
    root = tmp_path_factory.mktemp("init") / "fork"
    shutil.copytree(SAMPLE, root, ignore=shutil.ignore_patterns(".basinmark-cache"))
    (root / "basins.toml").unlink()
    (root / "basinmark-set.toml").unlink()
    return root


def test_init_on_the_bundled_set_proposes_its_bonds_and_classifies_like_its_rules(bare_sample, capsys):
    from basinmark.core.classify import classify_set
    from basinmark.core.rules import load_rules
    from basinmark.core.sets import open_set

    assert main(["init", str(bare_sample), "-q"]) == 0
    out = capsys.readouterr().out
    assert "Atoms (numbers as in rules files, from 1): 1 C, 2 C" in out
    assert "Bonds of the transition-state frame" in out and "1-2 " in out
    assert "time: fs" in out and "energy: eV" in out and "length: angstrom" in out
    assert "PROPOSED" in out and "--accept" in out
    # nothing is classified on the proposal until it is accepted
    assert not (bare_sample / "basins.toml").exists() and (bare_sample / "basins.proposed.toml").is_file()
    proposed = load_rules(bare_sample / "basins.proposed.toml", n_atoms=12)
    bundled = load_rules(SAMPLE / "basins.toml", n_atoms=12)
    pairs = {tuple(sorted(m.atoms)) for m in proposed.monitors.values()}
    assert {tuple(sorted(m.atoms)) for m in bundled.monitors.values()} <= pairs, pairs
    # the user accepts; the set is then classified with at least 95 % agreement to the bundled rules
    assert main(["init", str(bare_sample), "--accept"]) == 0
    accepted = load_rules(bare_sample / "basins.toml", n_atoms=12)
    assert "accepted by" in (bare_sample / "basins.toml").read_text()
    tset = open_set(bare_sample)
    ours = classify_set(tset, accepted).set_index("run")["outcome"]
    ref = classify_set(tset, bundled).set_index("run")["outcome"]
    # name the proposed products after the bundled ones they overlap most (the chemist renames them)
    table = pd.crosstab(ours, ref)
    rename = {p: table.loc[p].idxmax() for p in table.index if p not in ("recrossing", "unfinished", "ambiguous")}
    agreement = float((ours.map(lambda x: rename.get(x, x)) == ref).mean())
    assert agreement >= 0.95, table
    assert sorted(set(rename.values())) == ["alpha", "beta", "reactant"] or set(rename.values()) >= {"alpha", "beta"}


def test_the_written_manifest_reads_the_set_as_before(bare_sample, capsys):
    from basinmark.core.manifest import load_layout
    from basinmark.core.sets import open_set

    # self-contained: under pytest-xdist the test above may run on another worker with its own copy
    if not (bare_sample / "basinmark-set.toml").exists():
        assert main(["init", str(bare_sample), "-q"]) == 0
    text = (bare_sample / "basinmark-set.toml").read_text()
    assert "# How the runs were found:" in text and 'time = "fs"   # likely' in text
    layout = load_layout(bare_sample)
    assert layout.patterns_given
    assert len(open_set(bare_sample, use_cache=False)) == 200


def test_accept_refuses_to_replace_rules_and_checks_the_file(tmp_path, capsys):
    from basinmark.core.errors import SetError
    from basinmark.core.init_files import accept_proposal

    with pytest.raises(SetError, match="no proposed rules"):
        accept_proposal(tmp_path)
    (tmp_path / "basins.proposed.toml").write_text("name = 'x'\ndwell_fs = 1\n[monitors]\nd = [1, 2]\n")
    with pytest.raises(Exception, match="basins.proposed.toml"):
        accept_proposal(tmp_path)  # not a valid rules file: named with its problem, nothing accepted
    assert not (tmp_path / "basins.toml").exists()


def test_likely_units_from_a_folder_written_in_other_units(tmp_path, capsys):
    """Halves written in ps, kcal/mol and bohr: init says so, and writes the likely units commented out."""
    from ase import units

    rng = np.random.default_rng(5)
    base = rng.normal(scale=0.9, size=(3, 3)) + np.array([[0, 0, 0], [1.0, 0, 0], [0, 1.0, 0]])
    dt = 0.5  # fs
    for i in range(6):
        for role, sign in (("bwd", -1), ("fwd", 1)):
            lines = []
            vel = rng.normal(scale=0.01, size=(3, 3))  # Å/fs
            pos = base.copy()
            m = np.array([15.999, 1.008, 1.008])
            for k in range(8):
                ke = 0.5 * float(np.sum(m[:, None] * vel ** 2)) * units._amu * 1e10 / units._e  # eV
                lines += ["3", f"t={sign * k * dt / 1000:.6f} ekin={ke / (units.kcal / units.mol):.8f}"]
                lines += [f"{s} {x / units.Bohr:.8f} {y / units.Bohr:.8f} {z / units.Bohr:.8f}"
                          for s, (x, y, z) in zip("OHH", pos)]
                pos = pos + sign * vel * dt
            (tmp_path / f"r{i}_{role}.xyz").write_text("\n".join(lines) + "\n")
    assert main(["init", str(tmp_path), "-q"]) == 0
    out = capsys.readouterr().out
    assert "time: ps" in out and "energy: kcal/mol" in out and "length: bohr" in out, out
    text = (tmp_path / "basinmark-set.toml").read_text()
    assert '# time = "ps"   # LIKELY' in text and '# energy = "kcal/mol"   # LIKELY' in text
    assert '# length = "bohr"   # LIKELY' in text
    assert 'time = "fs"   # as read now' in text  # the reading is not changed behind the chemist's back


def test_otsu_split_agrees_with_two_cluster_kmeans():
    """In one dimension Otsu's split and two-cluster k-means minimise the same within-group variance."""
    from sklearn.cluster import KMeans  # reference library

    rng = np.random.default_rng(11)
    for _ in range(5):
        v = np.concatenate([rng.normal(1.6, 0.08, rng.integers(20, 200)), rng.normal(3.2, 0.3, rng.integers(20, 200))])
        split = otsu_split(v)
        km = KMeans(n_clusters=2, init=np.array([[v.min()], [v.max()]]), n_init=1).fit(v[:, None])
        low = v[km.labels_ == km.labels_[np.argmin(v)]]
        assert split.low.size == low.size and split.low.max() == low.max()
        assert 0.9 < split.explained <= 1.0


def test_window_offers_to_propose_rules_for_a_folder_without_any(qtbot, bare_sample, tmp_path):
    from basinmark.gui.main_window import MainWindow

    root = tmp_path / "fresh"
    shutil.copytree(bare_sample, root, ignore=shutil.ignore_patterns("basins*.toml", "basinmark-set.toml"))
    win = MainWindow()
    qtbot.addWidget(win)
    with qtbot.waitSignal(win.set_loaded, timeout=60000):
        win.open_set(root)
    offer = win.init_offer
    assert offer is not None and offer.box.isVisible() and "no rules file" in offer.box.text()
    offer.propose_button.click()
    assert offer.dialog is not None and "PROPOSED" in offer.dialog.text.toPlainText()
    assert (root / "basins.proposed.toml").is_file() and not (root / "basins.toml").exists()
    assert win.state.rules is None  # nothing classified on the proposal yet
    with qtbot.waitSignal(win.rules_applied, timeout=60000):
        offer.dialog.accept_button.click()
    assert (root / "basins.toml").is_file() and win.state.rules is not None
