"""The desktop window: PySide6 + pyqtgraph views over the core objects (no chemistry here)."""
