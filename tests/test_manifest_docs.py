"""The manifest documentation's examples are true: every TOML block is accepted, and the layouts open as told."""

from __future__ import annotations

import re
from pathlib import Path

import pytest

from basinmark.core.manifest import MANIFEST_NAME, load_layout
from basinmark.core.sets import open_set

DOC = Path(__file__).resolve().parents[1] / "docs" / "set-manifest.md"
BLOCKS = re.findall(r"```toml\n(.*?)```", DOC.read_text(encoding="utf-8"), flags=re.S)


def _half(path: Path, sign: int, n=4, keys="time={t:g}", scale=1.0, symbols=("O", "H", "H")) -> None:
    path.parent.mkdir(parents=True, exist_ok=True)
    lines = []
    for i in range(n):
        lines += [str(len(symbols)), keys.format(t=sign * i, e=-1.0 - 0.001 * i)]
        lines += [f"{s} {scale * (k + 0.01 * sign * i):.5f} 0.0 0.0" for k, s in enumerate(symbols)]
    path.write_text("\n".join(lines) + "\n")


def test_the_document_has_toml_examples_and_every_one_is_accepted(tmp_path):
    assert len(BLOCKS) >= 3
    for i, block in enumerate(BLOCKS):
        folder = tmp_path / f"b{i}"
        folder.mkdir()
        (folder / MANIFEST_NAME).write_text(block, encoding="utf-8")
        load_layout(folder)  # raises with file, key and line if the documentation is wrong


def _block(word: str) -> str:
    return next(b for b in BLOCKS if word in b)


def test_worked_example_patterns_of_ones_own(tmp_path):
    _half(tmp_path / "traj_12_back.xyz", -1)
    _half(tmp_path / "traj_12_front.xyz", +1)
    (tmp_path / MANIFEST_NAME).write_text(_block("traj_{run}_back"))
    assert open_set(tmp_path, use_cache=False).run_ids == ["12"]


def test_worked_example_one_folder_per_run_by_pattern(tmp_path):
    for rid in ("r01", "r02"):
        _half(tmp_path / "data" / rid / "minus.xyz", -1)
        _half(tmp_path / "data" / rid / "plus.xyz", +1)
    (tmp_path / MANIFEST_NAME).write_text(_block("{run}/minus"))
    tset = open_set(tmp_path, use_cache=False)
    assert tset.run_ids == ["r01", "r02"] and [s.role for s in tset["r01"].sources] == ["backward", "forward"]


def test_worked_example_own_names_and_units(tmp_path):
    from ase.units import Bohr, Hartree

    keys = "Properties=species:S:1:pos:R:3 t_ps={t:g} U={e:.6f} K=0.0213"
    _half(tmp_path / "a.bwd.xyz", -1, keys=keys)
    _half(tmp_path / "a.fwd.xyz", +1, keys=keys)
    (tmp_path / MANIFEST_NAME).write_text(_block("t_ps"))
    t = open_set(tmp_path, use_cache=False)["a"]
    assert t.times[-1] == pytest.approx(3000.0)  # 3 ps
    # reference: ase.units (CODATA) for the hartree and the bohr
    assert t.energies["kinetic"][0] == pytest.approx(0.0213 * Hartree)
    assert float(t.positions[t.ts_index, 1, 0]) == pytest.approx(1.0 * Bohr, rel=1e-6)
