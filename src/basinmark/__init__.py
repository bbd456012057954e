"""basinmark: classify, inspect, hand-label and count reaction-dynamics runs.

The headless core lives in :mod:`basinmark.core` (no Qt); the desktop window in
:mod:`basinmark.gui`; the command line in :mod:`basinmark.cli`.
"""

__version__ = "0.1.0"
