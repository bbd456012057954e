"""scripts/qt-system-libs.sh: the system libraries Qt's window platform lacks are named, installed as root,
or given as the exact install command otherwise (ldd and id replaced by stand-ins on PATH)."""

from __future__ import annotations

import os
import shutil
import subprocess
import sys
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
SCRIPT = ROOT / "scripts" / "qt-system-libs.sh"

pytestmark = pytest.mark.skipif(shutil.which("bash") is None, reason="needs bash")


def _run(tmp_path, missing, uid, platform="xcb", dry=True):
    bin_ = tmp_path / "bin"
    bin_.mkdir(exist_ok=True)
    log = tmp_path / "ldd.log"
    lines = "".join(f"\\t{lib} => not found\\n" for lib in missing)
    (bin_ / "ldd").write_text(f'#!/bin/sh\necho "$@" >> {log}\nprintf "\\tlibc.so.6 => /lib/libc.so.6\\n{lines}"\n')
    (bin_ / "id").write_text(f"#!/bin/sh\necho {uid}\n")
    (bin_ / "apt-get").write_text("#!/bin/sh\necho apt-get should not run in tests >&2; exit 9\n")
    for f in bin_.iterdir():
        f.chmod(0o755)
    env = dict(os.environ, PATH=f"{bin_}:{os.environ['PATH']}")
    if dry:
        env["QT_LIBS_DRY_RUN"] = "1"
    out = subprocess.run(["bash", str(SCRIPT), sys.executable, platform], capture_output=True, text=True, env=env)
    return out, log.read_text() if log.exists() else ""


def test_nothing_missing_is_silent(tmp_path):
    out, log = _run(tmp_path, [], uid=1000)
    assert out.returncode == 0 and out.stdout == "" and "libqxcb.so" in log


def test_a_user_is_given_the_exact_command(tmp_path):
    out, _ = _run(tmp_path, ["libxcb-keysyms.so.1", "libxcb-icccm.so.4", "libxcb-cursor.so.0", "libodd.so.3"],
                  uid=1000)
    assert out.returncode == 1
    assert "sudo apt-get install --no-install-recommends libxcb-cursor0 libxcb-icccm4 libxcb-keysyms1" in out.stdout
    assert "no package known for: libodd.so.3" in out.stdout


def test_root_installs_only_what_is_missing(tmp_path):
    out, _ = _run(tmp_path, ["libxkbcommon-x11.so.0", "libxcb-render-util.so.0"], uid=0)
    assert out.returncode == 0, out.stdout + out.stderr
    assert "would install: libxcb-render-util0 libxkbcommon-x11-0" in out.stdout


def test_offscreen_checks_the_offscreen_plugin(tmp_path):
    out, log = _run(tmp_path, [], uid=0, platform="offscreen")
    assert out.returncode == 0 and "libqoffscreen.so" in log and "libqxcb.so" not in log


def test_make_demo_and_ci_use_the_script():
    make = subprocess.run(["make", "-n", "-W", ".venv/.installed", "demo"], cwd=ROOT, capture_output=True,
                          text=True).stdout
    lines = [ln for ln in make.splitlines() if "qt-system-libs.sh" in ln or "basinmark open" in ln]
    assert len(lines) == 2 and "qt-system-libs.sh" in lines[0] and " xcb" in lines[0], make
    assert "scripts/qt-system-libs.sh .venv/bin/python offscreen" in (ROOT / ".ci" / "run").read_text()
