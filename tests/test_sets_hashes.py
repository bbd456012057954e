"""What labels are bound to: a run's content hash follows its decompressed content and how it is read."""

from __future__ import annotations

import bz2
import gzip
import lzma
from pathlib import Path

import numpy as np
import pytest
from hypothesis import assume, given, strategies as st

from basinmark.core.journal import LabelJournal
from basinmark.core.sets import journal_path, open_set
from basinmark.core.content_hash import content_sha256


def _half(path: Path, sign: int, frames=4, keys="time={t:.2f} epot={e:.4f} ekin=0.5000") -> None:
    lines = []
    for i in range(frames):
        lines += ["3", keys.format(t=sign * 0.5 * i, e=-1.0 + 0.01 * i),
                  "O 0.0 0.0 0.0", f"H {0.96 + 0.01 * sign * i:.4f} 0.0 0.0", "H -0.24 0.93 0.0"]
    path.write_text("\n".join(lines) + "\n")


def _set(root: Path, n=3, **kw) -> Path:
    root.mkdir(parents=True, exist_ok=True)
    for i in range(n):
        _half(root / f"r{i}.bwd.xyz", -1, **kw)
        _half(root / f"r{i}.fwd.xyz", +1, frames=5, **kw)
    return root


def _label_all(root: Path) -> None:
    tset = open_set(root, use_cache=False)
    with LabelJournal.open(journal_path(root), labeler="ana") as j:
        for t in tset:
            j.record(t.run_id, "excluded", content_hash=t.content_hash, reason="test")


def _changed(root: Path, use_cache=False) -> dict[str, bool]:
    tset = open_set(root, use_cache=use_cache)
    with LabelJournal.open(journal_path(root), readonly=True) as j:
        state = j.state(current_hashes=dict(tset.content_hashes()))
    return {r: bool(c) for r, c in zip(state["run"], state["data_changed"])}


def _recompress(path: Path, how) -> Path:
    data = path.read_bytes()
    for suffix in (".gz", ".bz2", ".xz"):
        if path.name.endswith(suffix):
            data = {".gz": gzip.decompress, ".bz2": bz2.decompress, ".xz": lzma.decompress}[suffix](data)
            path.unlink()
            path = path.with_name(path.name[: -len(suffix)])
            break
    else:
        path.unlink()
    suffix, packed = how(data)
    out = path.with_name(path.name + suffix)
    out.write_bytes(packed)
    return out


@pytest.mark.parametrize("use_cache", [False, True])
def test_recompressing_a_file_keeps_its_labels_valid(tmp_path, use_cache):
    root = _set(tmp_path / "s")
    for p in root.glob("*.xyz"):
        _recompress(p, lambda d: (".gz", gzip.compress(d, compresslevel=1, mtime=0)))
    _label_all(root)
    open_set(root)  # fills the cache with the first compression
    # the same content, compressed again at another level, in another format, or not at all
    _recompress(root / "r0.fwd.xyz.gz", lambda d: (".gz", gzip.compress(d, compresslevel=9, mtime=12345)))
    _recompress(root / "r1.bwd.xyz.gz", lambda d: (".bz2", bz2.compress(d)))
    _recompress(root / "r2.fwd.xyz.gz", lambda d: ("", d))
    assert _changed(root, use_cache) == {"r0": False, "r1": False, "r2": False}
    # while a real change of content is still noticed
    _recompress(root / "r1.bwd.xyz.bz2", lambda d: (".xz", lzma.compress(d.replace(b"0.9500", b"0.9400"))))
    assert _changed(root, use_cache) == {"r0": False, "r1": True, "r2": False}


@pytest.mark.parametrize("section, change", [
    ("units", 'time = "ps"'),
    ("units", 'energy = "kcal/mol"'),
    ("units", 'length = "bohr"'),
    ("keys", 'potential = "ekin"'),
    ("time", 'backward = "elapsed"'),  # the time convention of backward halves (auto found them signed)
])
def test_a_manifest_change_in_how_data_is_read_marks_labels(tmp_path, section, change):
    root = _set(tmp_path / "s")
    _label_all(root)
    open_set(root)  # the old reading is cached; the new one must not be taken from there
    (root / "basinmark-set.toml").write_text(f"[{section}]\n{change}\n")
    assert _changed(root, use_cache=True) == {"r0": True, "r1": True, "r2": True}


def test_a_manifest_change_that_reads_the_same_values_changes_nothing(tmp_path):
    root = _set(tmp_path / "s")
    _label_all(root)
    # other candidate keys that the files do not carry, a name, a TST estimate, a step used only without times
    (root / "basinmark-set.toml").write_text('name = "renamed"\n[keys]\npotential = ["epot", "u_pot"]\n'
                                             '[time]\nstep_fs = 2.0\n[tst]\nddg = 0.2\n')
    assert _changed(root) == {"r0": False, "r1": False, "r2": False}


def test_the_time_step_counts_when_the_files_have_no_time(tmp_path):
    root = _set(tmp_path / "s", keys="epot={e:.4f} ekin=0.5000")
    _label_all(root)
    (root / "basinmark-set.toml").write_text("[time]\nstep_fs = 0.5\n")
    assert _changed(root) == {"r0": True, "r1": True, "r2": True}


def test_pairing_changed_by_the_manifest_marks_only_the_runs_it_touches(tmp_path):
    root = _set(tmp_path / "s")
    _label_all(root)
    # r1's forward half is replaced by another file through the manifest's patterns
    _half(root / "r1.fwd-alt.xyz", +1, frames=7)
    (root / "basinmark-set.toml").write_text('[files]\nbackward = "{run}.bwd.xyz"\n'
                                             'forward = ["{run}.fwd-alt.xyz", "{run}.fwd.xyz"]\n')
    tset = open_set(root, use_cache=False)
    assert tset["r1"].n_frames == 4 + 7 - 1
    assert _changed(root) == {"r0": False, "r1": True, "r2": False}


@given(st.binary(max_size=3000), st.sampled_from(["gz", "bz2", "xz", "gz2"]))
def test_content_hash_is_the_hash_of_the_decompressed_bytes(tmp_path_factory, data, kind):
    import hashlib

    assume(not data.startswith((b"\x1f\x8b", b"BZh", b"\xfd7zXZ\x00")))  # plain bytes that look compressed
    folder = tmp_path_factory.mktemp("h")
    packed = {"gz": lambda d: gzip.compress(d), "bz2": bz2.compress, "xz": lzma.compress,
              # two gzip members one after the other, as `cat a.gz b.gz` makes: one stream to every reader
              "gz2": lambda d: gzip.compress(d[: len(d) // 2]) + gzip.compress(d[len(d) // 2:])}[kind](data)
    path = folder / "f.bin"
    path.write_bytes(packed)
    # reference: the standard library's own one-shot decompressors (gzip, bz2, lzma modules)
    assert content_sha256(path) == hashlib.sha256(data).hexdigest()
    path.write_bytes(data)
    assert content_sha256(path) == hashlib.sha256(data).hexdigest()
