"""Numbers taken out of free-form comment lines (not ``key=value``) by a template or a regular expression.

A set's manifest may describe such lines (``[comment]`` in ``basinmark-set.toml``)::

    template = "i = {step}, time = {time}, E = {potential}"
    # or, for anything a template cannot say:
    regex = 'time\\s*=\\s*(?P<time>\\S+?),'

Template: ``{name}`` stands for a number (decimal, exponent with e/E or the
Fortran d/D), ``{*}`` for any text, a run of spaces for any spacing (none
included); everything else is literal.  The template may match anywhere in
the line.  A regular expression names its numbers with ``(?P<name>...)``.  The
fields ``time``, ``potential``, ``kinetic`` and ``total`` feed the run's time
and energies; any other field is kept as a per-frame number too.
"""

from __future__ import annotations

import re
from dataclasses import dataclass

import numpy as np

NUMBER = r"[+-]?(?:\d+\.?\d*|\.\d+)(?:[eEdD][+-]?\d+)?|[+-]?(?:nan|inf)"
ROLES = ("time", "potential", "kinetic", "total")
_PLACE = re.compile(r"\{([^{}]*)\}|( +)")
_FORTRAN = bytes.maketrans(b"dD", b"eE")


def template_regex(template: str) -> str:
    """The regular expression a template stands for; raises ValueError naming what is wrong."""
    out, at, names = [], 0, []
    for m in _PLACE.finditer(template):
        out.append(re.escape(template[at:m.start()]))
        at = m.end()
        if m.group(2) is not None:
            out.append(r"\s*")
            continue
        name = m.group(1).strip()
        if name == "*":
            out.append(r".*?")
        elif name.isidentifier():
            if name in names:
                raise ValueError(f"the field {{{name}}} appears twice")
            names.append(name)
            out.append(f"(?P<{name}>{NUMBER})")
        else:
            raise ValueError(f"{{{m.group(1)}}} is not a field: write {{name}} for a number or {{*}} for any text")
    out.append(re.escape(template[at:]))
    if not names:
        raise ValueError("the template names no field; write e.g. {time} where the time stands")
    return "".join(out)


@dataclass(frozen=True)
class CommentFormat:
    """How to read free-form comment lines: a regular expression and a factor per field (to the set's units)."""

    pattern: str
    factors: tuple[tuple[str, float], ...] = ()  # field -> multiply by (unit conversion); others 1
    described: str = ""  # e.g. "the [comment] template of basinmark-set.toml", for messages

    def __post_init__(self):
        rx = re.compile(self.pattern.encode())
        if not rx.groupindex:
            raise ValueError("the regular expression names no field; write (?P<time>...) around the time")
        object.__setattr__(self, "_rx", rx)

    @property
    def fields(self) -> tuple[str, ...]:
        return tuple(self._rx.groupindex)

    def extract(self, lines: list[bytes]) -> tuple[dict[str, np.ndarray], list[int], list[tuple[int, str]]]:
        """Per-field float64 arrays (NaN where a line does not match), the lines that did not match, and
        ``(line, text)`` of field values that are not numbers."""
        n = len(lines)
        values = {name: np.full(n, np.nan) for name in self._rx.groupindex}
        missed: list[int] = []
        bad: list[tuple[int, str]] = []
        search = self._rx.search
        for i, line in enumerate(lines):
            m = search(line)
            if m is None:
                missed.append(i)
                continue
            for name, text in m.groupdict().items():
                if text is None:
                    continue
                try:
                    values[name][i] = float(text.translate(_FORTRAN))
                except ValueError:
                    bad.append((i, f"{name}={text.decode('utf-8', 'replace')!r}"))
        for name, factor in self.factors:
            if name in values and factor != 1.0:
                values[name] *= factor
        return values, missed, bad
