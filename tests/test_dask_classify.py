"""`basinmark classify --scheduler/--workers`: the per-run work as tasks on a local Dask cluster gives the table
and the journal of the single-process path; an unreachable scheduler is a plain error within a short time; a
damaged file fails with its file and line while the rest classify; without Dask a plain sentence names the extra."""

from __future__ import annotations

import io
import json
import logging
import shutil
import socket
import subprocess
import sys
import textwrap
import time

import pandas as pd
import pytest

distributed = pytest.importorskip("distributed")

from basinmark.cli import main  # noqa: E402
from basinmark.core.classify import classify_set, outcome_counts  # noqa: E402
from basinmark.core.dask_classify import ClusterError, classify_on_cluster  # noqa: E402
from basinmark.core.rules import parse_rules  # noqa: E402
from basinmark.core.run_task import assemble_table  # noqa: E402
from basinmark.core.sets import open_set  # noqa: E402

from tests.generated_runs import DAMAGED, write_generated_set  # noqa: E402
from tests.rules_examples import SCHEMA_EXAMPLE  # noqa: E402


@pytest.fixture(scope="module")
def made(tmp_path_factory):
    root = tmp_path_factory.mktemp("dask") / "set"
    info = write_generated_set(root, 30, SCHEMA_EXAMPLE, seed=11)
    return root, info


@pytest.fixture
def tcp_cluster():
    """Two workers as threads of this process, behind a real TCP scheduler on the loopback (starts in a second)."""
    with distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=False, protocol="tcp",
                                  host="127.0.0.1", dashboard_address=":0", silence_logs=logging.ERROR) as cluster:
        yield cluster


def _unused_port() -> int:
    with socket.socket() as s:
        s.bind(("127.0.0.1", 0))
        return s.getsockname()[1]


def test_two_workers_give_the_single_process_table(made):
    root, info = made
    rules = parse_rules(SCHEMA_EXAMPLE)
    local = open_set(root, use_cache=False)
    expected = classify_set(local, rules)
    tset, parts = classify_on_cluster(root, rules, workers=2, processes=False, batch=4)
    table = assemble_table(tset, parts, rules)
    pd.testing.assert_frame_equal(table, expected, check_exact=True)
    assert table.attrs == expected.attrs
    assert tset.content_hashes() == local.content_hashes() and tset.warnings == local.warnings
    # the damaged file failed on a worker with its file and line, as the local open says it; the rest classified
    assert [(f.path, f.line) for f in tset.failures] == [(info["damaged"], info["line"])]
    assert [str(f) for f in tset.failures] == [str(f) for f in local.failures]
    assert DAMAGED not in set(table["run"]) and len(table) == 30


def _journal(path):
    """The journal's events without what differs between two writings (times, sequence, hash chain)."""
    keep = ("kind", "run", "label", "reason", "content_hash", "rules_hash", "source", "labeler", "count", "batch")
    return [{k: ev[k] for k in keep if k in ev} for ev in map(json.loads, path.read_text().splitlines())]


def test_cli_on_a_scheduler_writes_the_same_journal_once(made, tcp_cluster, tmp_path, capsys):
    root, _ = made
    here, there = tmp_path / "here", tmp_path / "there"
    shutil.copytree(root, here)
    shutil.copytree(root, there)
    assert main(["classify", str(here), "-q", "--no-cache", "--format", "csv"]) == 0
    local = capsys.readouterr()
    assert main(["classify", str(there), "-q", "--format", "csv", "--scheduler", tcp_cluster.scheduler_address]) == 0
    remote = capsys.readouterr()
    pd.testing.assert_frame_equal(pd.read_csv(io.StringIO(remote.out)), pd.read_csv(io.StringIO(local.out)),
                                  check_exact=True)
    events = _journal(there / "basinmark-labels.jsonl")
    assert events == _journal(here / "basinmark-labels.jsonl")
    assert [e["kind"] for e in events].count("batch_begin") == 1  # one batch, written by the client
    assert "1 file(s) of the set failed to load" in remote.err
    # the same rules on the same files again, the scheduler named by its file: nothing new, as locally
    sched = tmp_path / "scheduler.json"
    sched.write_text(json.dumps({"address": tcp_cluster.scheduler_address}))
    assert main(["classify", str(there), "-q", "--scheduler", str(sched)]) == 0
    assert "0 automatic labels written" in capsys.readouterr().out


def test_unreachable_scheduler_is_a_plain_error_in_seconds(made, tmp_path, capsys):
    root, _ = made
    address = f"tcp://127.0.0.1:{_unused_port()}"
    start = time.monotonic()
    code = main(["classify", str(root), "-q", "--dry-run", "--scheduler", address, "--connect-timeout", "2"])
    took = time.monotonic() - start
    err = capsys.readouterr().err
    assert code == 2 and took < 30
    assert f"cannot reach a Dask scheduler at {address} within 2 s" in err and "Traceback" not in err
    assert not (root / "basinmark-labels.jsonl").exists()
    assert main(["classify", str(root), "-q", "--scheduler", "no address here"]) == 2
    assert "'no address here' is not a scheduler address" in capsys.readouterr().err
    sched = tmp_path / "scheduler.json"
    sched.write_text(json.dumps({"address": address}))
    assert main(["classify", str(root), "-q", "--scheduler", str(sched), "--connect-timeout", "1"]) == 2
    assert f"at {address} (from the scheduler file {sched}) within 1 s" in capsys.readouterr().err


def test_a_worker_that_cannot_see_the_set_is_named(made, tcp_cluster, tmp_path):
    from basinmark.core.dask_classify import _check_workers, _Connection

    conn = _Connection(tcp_cluster.scheduler_address, None, 5.0, False)
    with conn as client:
        assert _check_workers(client, conn, made[0] / "basins.toml", 30) == 2
        with pytest.raises(ClusterError, match="cannot see .*nowhere.*same path"):
            _check_workers(client, conn, tmp_path / "nowhere", 30)


def test_local_worker_processes_on_the_command_line(made, tmp_path, capsys):
    """`--workers 2` starts real worker processes: everything crosses a process boundary and back."""
    root, _ = made
    there = tmp_path / "set"
    shutil.copytree(root, there)
    assert main(["classify", str(there), "-q", "--dry-run", "--format", "json", "--workers", "2"]) == 0
    doc = json.loads(capsys.readouterr().out)
    assert doc["runs"] == 30
    rules = parse_rules(SCHEMA_EXAMPLE)
    local = outcome_counts(classify_set(open_set(there, use_cache=False), rules), rules)
    assert [(c["outcome"], c["count"]) for c in doc["counts"]] == list(zip(local["outcome"], local["count"]))


def test_without_dask_the_options_name_the_extra(made):
    """Core and the command line import without Dask; asking for a cluster then says which extra to install."""
    code = textwrap.dedent(f"""
        import importlib, pkgutil, sys
        class Block:
            def find_spec(self, name, path=None, target=None):
                if name.split('.')[0] in ('dask', 'distributed'):
                    raise ImportError('blocked in this test: ' + name)
        sys.meta_path.insert(0, Block())
        import basinmark.core as core
        for info in pkgutil.walk_packages(core.__path__, 'basinmark.core.'):
            importlib.import_module(info.name)
        from basinmark.cli import main
        sys.exit(main(['classify', {str(made[0])!r}, '-q', '--dry-run', '--workers', '2']))
        """)
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=120)
    assert out.returncode == 2, out.stderr
    assert "optional extra 'cluster'" in out.stderr and "pip install 'basinmark[cluster]'" in out.stderr
    assert "Traceback" not in out.stderr
