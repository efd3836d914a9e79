"""One-line texts for chemistry errors and reference notes."""

from __future__ import annotations

__all__ = ["add_note", "one_line", "reason"]


def one_line(text: str) -> str:
    """``text`` with all whitespace runs collapsed to one space."""
    return " ".join(str(text).split())


def reason(err: BaseException) -> str:
    """``"ErrorType: message"`` of an exception, one line, at most 160 characters of message."""
    text = one_line(str(err)) or "no message"
    return f"{type(err).__name__}: {text[:160]}"


def add_note(notes: dict, key: str, text: str) -> None:
    """Append ``text`` to ``notes[key]`` (``"; "``-separated)."""
    notes[key] = f"{notes[key]}; {text}" if key in notes else text
