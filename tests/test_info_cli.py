"""`basinmark info` end to end: the table, the failures, the exit code."""

from pathlib import Path

from basinmark.cli import main

SAMPLE = Path(__file__).resolve().parents[1] / "sample_sets" / "ringfork"


def test_info_on_a_set_with_a_bad_file(tmp_path, capsys):
    for f in sorted((SAMPLE / "runs").iterdir())[:6]:
        (tmp_path / f.name).write_bytes(f.read_bytes())
    (tmp_path / "run-0099.bwd.xyz").write_text("3\n\nC 0 0 0\nH 1 0 0\n")   # truncated: one atom line short
    (tmp_path / "run-0099.fwd.xyz").write_text("1\n\nC 0 0 0\n")
    assert main(["info", str(tmp_path), "--no-cache"]) == 0
    out = capsys.readouterr().out
    assert "run-0001" in out and "run-0003" in out
    assert "3 runs loaded" in out and "1 file(s) not loaded" in out
    assert "run-0099.bwd.xyz" in out


def test_info_csv_and_empty_folder(tmp_path, capsys):
    assert main(["info", str(tmp_path), "--format", "csv"]) == 2  # no runs: not a set, said plainly
    assert f"{tmp_path} is not a set" in capsys.readouterr().err
    assert main(["info", str(tmp_path / "missing")]) == 2
    assert "no such folder" in capsys.readouterr().err
