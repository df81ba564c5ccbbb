"""Keyword arguments → the command line's flags, one rule for every command."""

from __future__ import annotations

from os import PathLike
from typing import Any, Dict, List


def flag_name(key: str) -> str:
    """``max_false_go`` → ``--max-false-go`` (a trailing ``_`` is dropped: ``class_``)."""
    return "--" + key.rstrip("_").replace("_", "-")


def value_text(v: Any) -> str:
    """A flag's value as text: paths as they are, floats by ``repr`` (shortest exact)."""
    if isinstance(v, PathLike):
        return str(v)
    if isinstance(v, float):
        return repr(v)
    return str(v)


def flags(options: Dict[str, Any]) -> List[str]:
    """The flags for ``options``: ``True`` → the bare flag, ``False``/``None`` → left out,
    a list or tuple → the flag once per item, anything else → the flag and its value."""
    out: List[str] = []
    for key, v in options.items():
        name = flag_name(key)
        if v is None or v is False:
            continue
        if v is True:
            out.append(name)
        elif isinstance(v, (list, tuple)):
            for item in v:
                out += [name, value_text(item)]
        else:
            out += [name, value_text(v)]
    return out
