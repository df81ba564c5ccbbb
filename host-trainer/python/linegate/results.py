"""Typed results of the commands, read from the files (or the JSON) each command writes.

Every result keeps the whole record it was read from as ``data`` (a dict, the JSON the
command wrote), so a figure without its own attribute is still at hand.
"""

from __future__ import annotations

from dataclasses import dataclass, field
from pathlib import Path
from typing import Any, Dict, List, Optional

__all__ = [
    "TrainResult",
    "LogFigures",
    "AuditResult",
    "PackResult",
    "CompareResult",
    "ReplayResult",
    "DriftResult",
    "CheckResult",
]


@dataclass(frozen=True)
class TrainResult:
    """``linegate train``: the float model written.

    Attributes:
        model: the model file. model_id: its id. channels: its channels' names.
        classes: class names of a model of several classes, else ``None``.
        data: the model file's JSON.
    """

    model: Path
    model_id: str
    channels: List[str]
    classes: Optional[List[str]]
    data: Dict[str, Any] = field(repr=False)


@dataclass(frozen=True)
class LogFigures:
    """One log of an audit (``audit.json``'s ``sets``): its counts on the device.

    ``None`` where a kind of audit does not have the figure (a class audit's logs carry
    their confusion matrix in ``data`` instead).
    """

    name: str
    path: str
    units: int
    false_go: Optional[int]
    false_nogo: Optional[int]
    recheck: Optional[int]
    faults: Optional[int]
    flips: Optional[int]
    min_margin_lsb: Optional[float]
    data: Dict[str, Any] = field(repr=False)


@dataclass(frozen=True)
class AuditResult:
    """``linegate audit``: the release audit as ``audit.json`` records it.

    ``passed`` is ``False`` for an audit that ran and failed a gate (``reasons`` say
    which); the call returns it rather than raising unless ``check=True``.
    """

    passed: bool
    reasons: List[str]
    logs: List[LogFigures]
    model_id: Optional[str]
    blob_id: Optional[str]
    out_dir: Path
    json: Path
    data: Dict[str, Any] = field(repr=False)


@dataclass(frozen=True)
class PackResult:
    """``linegate pack``: the blob written (and images, when asked).

    Attributes:
        blob: the blob file; sha256: its SHA-256 (hex); size: its bytes;
        blob_id / key_id / model_id: as the blob holds them (``key_id`` ``None`` unsigned).
    """

    blob: Path
    sha256: str
    size: int
    blob_id: Optional[str]
    key_id: Optional[str]
    model_id: Optional[str]


@dataclass(frozen=True)
class CompareResult:
    """``linegate compare``: two releases over the same log.

    ``passed`` is the NO-GO→GO gate (``False``: more such changes than allowed; returned,
    not raised, unless ``check=True``); ``changes`` lists every unit whose outcome changes.
    """

    passed: bool
    units: int
    nogo_to_go: int
    recheck_to_go: int
    transitions: List[Dict[str, Any]]
    changes: List[Dict[str, Any]]
    json: Path
    data: Dict[str, Any] = field(repr=False)


@dataclass(frozen=True)
class ReplayResult:
    """``linegate replay``: the printed lines (``form``: device, text, csv or json)."""

    lines: List[str]
    form: str
    output: Path


@dataclass(frozen=True)
class DriftResult:
    """``linegate drift``: ``passed`` is ``False`` on an alarm (returned, not raised,
    unless ``check=True``); ``alarms`` say which."""

    passed: bool
    alarms: List[Any]
    units: Optional[int]
    data: Dict[str, Any] = field(repr=False)


@dataclass(frozen=True)
class CheckResult:
    """``linegate check``: ``separable`` (the exact LP verdict), the largest margin."""

    separable: bool
    margin: Optional[float]
    units: int
    data: Dict[str, Any] = field(repr=False)
