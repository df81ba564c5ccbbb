"""Keyword arguments → the command line's flags, one rule for every command."""

from __future__ import annotations

import numbers
from os import PathLike
from typing import Any, Dict, List


def flag_name(key: str) -> str:
    """``max_false_go`` → ``--max-false-go`` (a trailing ``_`` is dropped: ``class_``)."""
    return "--" + key.rstrip("_").replace("_", "-")


def value_text(v: Any) -> str:
    """A flag's value as text: paths as they are, real numbers (numpy's included) by the
    shortest text that reads back exactly, integers as integers."""
    if isinstance(v, PathLike):
        return str(v)
    if isinstance(v, numbers.Integral) and not isinstance(v, bool):
        return str(int(v))
    if isinstance(v, numbers.Real):
        return repr(float(v))
    return str(v)


def _is(v: Any, truth: bool) -> bool:
    """``v`` is the boolean ``truth`` (Python's or numpy's)."""
    return type(v).__name__ in ("bool", "bool_") and bool(v) is truth


def flags(options: Dict[str, Any]) -> List[str]:
    """The flags for ``options``: ``True`` → the bare flag, ``False``/``None`` → left out,
    a list or tuple → the flag once per item, anything else → the flag and its value."""
    out: List[str] = []
    for key, v in options.items():
        name = flag_name(key)
        if v is None or _is(v, False):
            continue
        if _is(v, True):
            out.append(name)
        elif isinstance(v, (list, tuple)):
            for item in v:
                out += [name, value_text(item)]
        else:
            out += [name, value_text(v)]
    return out
