"""Where a save dialog starts: the folder of the last export, never inside the data set's folder.

Exports (movies, figures, tables) are the chemist's own files; writing them among the runs by default
mixes them with the data (and a set folder may be shared or read-only).  The last folder written to is
remembered in the settings; a remembered folder that is gone or lies inside the set is passed over for the
user's pictures, documents or home folder.
"""

from __future__ import annotations

from pathlib import Path

from PySide6.QtCore import QSettings, QStandardPaths

#: settings key of the folder the last export was written to
LAST_FOLDER = "export/last_folder"


def inside(path: str | Path, root: str | Path | None) -> bool:
    """True when ``path`` is ``root`` or lies below it (symbolic links resolved)."""
    if root is None:
        return False
    p, r = Path(path).expanduser().resolve(), Path(root).expanduser().resolve()
    return p == r or r in p.parents


def default_export_folder(settings: QSettings, set_root: str | Path | None) -> Path:
    """The last export folder when it exists outside ``set_root``; else pictures, documents or home."""
    last = str(settings.value(LAST_FOLDER, "") or "")
    candidates = [Path(last)] if last else []
    for where in (QStandardPaths.StandardLocation.PicturesLocation, QStandardPaths.StandardLocation.DocumentsLocation,
                  QStandardPaths.StandardLocation.HomeLocation):
        loc = QStandardPaths.writableLocation(where)
        if loc:
            candidates.append(Path(loc))
    for folder in candidates:
        if folder.is_dir() and not inside(folder, set_root):
            return folder
    root = Path(set_root).expanduser().resolve() if set_root is not None else Path.home()
    return root.parent  # home itself lies inside the set: the folder that holds the set


def remember_export_folder(settings: QSettings, written: str | Path) -> None:
    """Remember the folder of a file just written, for the next export's dialog."""
    settings.setValue(LAST_FOLDER, str(Path(written).expanduser().resolve().parent))


def save_file_dialog(parent, title: str, start: str, filters: str) -> tuple[str, str]:
    """The platform's save dialog (``(path, chosen filter)``; an empty path when cancelled).

    Every export asks through this one function, so tests replace it (a modal dialog blocks offscreen)."""
    from PySide6.QtWidgets import QFileDialog

    return QFileDialog.getSaveFileName(parent, title, start, filters)


def ask_export_path(window, title: str, default_name: str, filters: str) -> str:
    """Ask where to write an export, starting in :func:`default_export_folder` with ``default_name``.

    The chosen folder is remembered for the next export (of any kind); a name typed without a suffix takes
    the chosen filter's.  Returns "" when the person cancelled."""
    settings = window.settings
    tset = window.state.tset
    folder = default_export_folder(settings, tset.root if tset is not None else None)
    path, chosen = save_file_dialog(window, title, str(folder / default_name), filters)
    if not path:
        return ""
    if not Path(path).suffix:
        path += chosen.split("*")[-1].rstrip(")").strip() if "*" in chosen else ""
    remember_export_folder(settings, path)
    return path
