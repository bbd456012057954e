"""Sub-commands of ``basinmark``: one module per group, each exposing ``register(subparsers)``.

Shared helpers for output formats live in :mod:`basinmark.commands._output`.
"""
