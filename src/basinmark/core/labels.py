"""The label vocabulary: outcomes from the rules file plus a few fixed labels, and checks on them.

A label is what a run did (or why it is left out of the counts):

* the product basins of the rules file (``rules.products``);
* ``recrossing`` (both ends in the same basin), ``unfinished`` (an end never committed),
  ``ambiguous`` (a person could not decide);
* ``excluded`` (a hand label only, with a required reason, e.g. a failed energy check).
"""

from __future__ import annotations

from typing import Iterable, Sequence

from basinmark.core.errors import BasinmarkError
from basinmark.core.text import TextError, check_labeler, check_plain_text, is_hidden

FIXED_LABELS: tuple[str, ...] = ("recrossing", "unfinished", "ambiguous", "excluded")

#: Where a label came from.  "hand", "import" and "review" labels override automatic ("rule") ones.
SOURCES: tuple[str, ...] = ("hand", "rule", "import", "review")
HAND_SOURCES: frozenset[str] = frozenset({"hand", "import", "review"})

#: Labels that need a reason whenever they are set.
REASON_REQUIRED: frozenset[str] = frozenset({"excluded"})

_MAX_LABEL_LENGTH = 64


class LabelError(BasinmarkError):
    """A label is not allowed here (unknown, malformed, or missing its required reason)."""


def all_labels(rules_or_products: object) -> list[str]:
    """Products of the rules (an object with ``.products``, or a list of names) followed by FIXED_LABELS."""
    products: Iterable[str] = getattr(rules_or_products, "products", rules_or_products)  # type: ignore[assignment]
    if isinstance(products, str):
        raise TypeError("all_labels wants the rules or a list of product names, not one string")
    out: list[str] = []
    for name in list(products) + list(FIXED_LABELS):
        if name not in out:
            out.append(str(name))
    return out


def check_label_text(label: object) -> str:
    """A label must be a short non-empty single-line string; returns it stripped."""
    if not isinstance(label, str):
        raise LabelError(f"a label must be text, got {type(label).__name__}")
    text = label.strip()
    if not text:
        raise LabelError("a label cannot be empty")
    if len(text) > _MAX_LABEL_LENGTH:
        raise LabelError(f"the label {text[:20]!r}... is longer than {_MAX_LABEL_LENGTH} characters")
    # control characters (C0 and C1), line/paragraph separators and direction overrides would lie in tables
    if any(is_hidden(c) for c in text):
        raise LabelError(f"the label {text!r} contains control characters or line breaks")
    return text


def check_reason(reason: object, what: str = "reason") -> str:
    """A reason (or note) as typed: one line of plain text (see :mod:`basinmark.core.text`), None → ""."""
    try:
        return check_plain_text(reason, what)
    except TextError as exc:
        raise LabelError(str(exc)) from None


def check_labeler_name(name: object, *, person: bool = True) -> str:
    """A labeler's name, stripped; names of automatic sources (auto, rule:…) are refused for people."""
    try:
        return check_labeler(name, person=person)
    except TextError as exc:
        raise LabelError(str(exc)) from None


def validate_label(label: object, allowed: Sequence[str] | None = None, *, reason: str = "") -> str:
    """Return the label (stripped) if it is allowed, else raise :class:`LabelError` listing the choices.

    ``allowed=None`` checks only the form.  ``excluded`` needs a non-empty ``reason``.
    """
    text = check_label_text(label)
    if allowed is not None and text not in allowed:
        raise LabelError(f"unknown label {text!r}; allowed labels are: {', '.join(allowed)}")
    if text in REASON_REQUIRED and not (reason or "").strip():
        raise LabelError(f"the label {text!r} needs a reason (say why the run is left out)")
    return text
