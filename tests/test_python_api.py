"""The notebook entry points: `import basinmark` gives the everyday functions, and the README's Python
example runs as printed."""

import re
import subprocess
import sys
from pathlib import Path

import basinmark

ROOT = Path(__file__).resolve().parents[1]


def test_top_level_names_resolve():
    for name in basinmark.__all__:
        assert getattr(basinmark, name) is not None
    from basinmark.core.sets import open_set

    assert basinmark.open_set is open_set


def test_readme_python_example_runs(tmp_path):
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    code = re.search(r"### 3\. From Python\n```python\n(.*?)```", text, re.S).group(1)
    out = subprocess.run([sys.executable, "-c", code], cwd=ROOT, capture_output=True, text=True, timeout=120)
    assert out.returncode == 0, out.stderr
    assert "alpha : beta" in out.stdout
