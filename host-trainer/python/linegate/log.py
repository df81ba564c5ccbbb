"""Logs read into numpy arrays by Linegate's own reader (the one every command uses)."""

from __future__ import annotations

from dataclasses import dataclass
from os import PathLike
from typing import Any, List, Optional, Sequence, Union

import numpy as np

from . import _native
from ._argv import flags

__all__ = ["Log", "read_log"]

PathArg = Union[str, "PathLike[str]"]


@dataclass(frozen=True)
class Log:
    """A log as Linegate reads it: one row per unit, one column per channel.

    Attributes:
        raw: the device's raw counts, ``units × channels`` (int32).
        physical: each reading as its raw count stands for it, ``zero + lsb · raw``
            (float64; the log's value rounded to the channel's lsb).
        labels: each unit's class code (int8): +1 GO, −1, −2 … the other classes in
            :attr:`classes` order after GO (with two classes the ±1 GO / NO-GO view);
            0 for a unit without label.
        class_index: each unit's index into :attr:`classes` (−1 without label).
        classes: the class names.
        lines: each unit's line in its file (from 1, as editors count; a Parquet log's row).
        unit_ids: each unit's id when the log has a unit-id column, else ``None``.
        channels: the channels' names, in column order of :attr:`raw`.
        files: the log's files (several files are one log).
        part_of: each unit's file, an index into :attr:`files`.
        skipped: rows skipped as unreadable (``skip_bad_rows=True``), else 0.
    """

    raw: np.ndarray
    physical: np.ndarray
    labels: np.ndarray
    class_index: np.ndarray
    classes: List[str]
    lines: np.ndarray
    unit_ids: Optional[List[str]]
    channels: List[str]
    files: List[str]
    part_of: np.ndarray
    skipped: int

    def __len__(self) -> int:
        return int(self.raw.shape[0])


def read_log(
    path: Union[PathArg, Sequence[PathArg]],
    model: Optional[PathArg] = None,
    **options: Any,
) -> Log:
    """Reads a bench log (CSV/TSV/…, or Parquet; several files are one log).

    With ``model`` the log is read as ``linegate audit`` and ``replay`` read it: the
    model's channels, scaling and reading options (a reading outside a channel's range is
    a :class:`LogError`; a label column is optional). Without, as ``linegate train``
    reads it: every numeric column a channel, scaled by its observed range or by
    ``sheet=``.

    Args:
        path: the log's file, or a list of files of one log.
        model: a float model file (``model.json``).
        **options: the commands' log flags as keywords: ``label="verdict"``,
            ``unit_id="serial"``, ``channels=["a", "b"]``, ``ignore=["operator"]``,
            ``go_labels=["pass"]``, ``delimiter=";"``, ``decimal_comma=True``,
            ``skip_bad_rows=True``, ``sheet="channels.toml"`` … (``x_y=v`` is ``--x-y v``).

    Raises:
        LogError: the log cannot be read; ``file``, ``line`` and ``column`` say where.
        UsageError: an unknown option or a value it refuses.
    """
    paths = [path] if isinstance(path, (str, PathLike)) else list(path)
    args = [str(p) for p in paths]
    if model is not None:
        args += ["--model", str(model)]
    args += flags(options)
    d = _native.read_log(args)
    return Log(
        raw=d["raw"],
        physical=d["physical"],
        labels=d["labels"],
        class_index=d["class_index"],
        classes=list(d["classes"]),
        lines=d["lines"],
        unit_ids=d["unit_ids"],
        channels=list(d["channels"]),
        files=list(d["files"]),
        part_of=d["part_of"],
        skipped=int(d["skipped"]),
    )
