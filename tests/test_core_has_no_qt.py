"""The core package must import and work with Qt made unimportable (architecture rule)."""

import subprocess
import sys
import textwrap


def test_core_imports_without_qt():
    code = textwrap.dedent(
        """
        import importlib, pkgutil, sys
        class Block:
            def find_spec(self, name, path=None, target=None):
                if name.split('.')[0] in ('PySide6', 'PyQt5', 'PyQt6', 'pyqtgraph', 'shiboken6', 'qtpy'):
                    raise ImportError('Qt is blocked in this test: ' + name)
                return None
        sys.meta_path.insert(0, Block())
        import basinmark.core as core
        for info in pkgutil.walk_packages(core.__path__, 'basinmark.core.'):
            importlib.import_module(info.name)
        import basinmark.cli
        loaded = [m for m in sys.modules if m.split('.')[0] in ('PySide6', 'pyqtgraph', 'shiboken6')]
        assert not loaded, loaded
        print('ok')
        """
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True)
    assert out.returncode == 0, out.stderr
    assert out.stdout.strip().endswith("ok")
