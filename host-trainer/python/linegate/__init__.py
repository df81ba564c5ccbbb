"""Linegate from Python.

The device's decisions bit for bit (:class:`Release`: a blob checked against its model
and, optionally, its signing key; :meth:`Release.classify` on a pandas DataFrame or a
numpy array), logs read by Linegate's own reader (:func:`read_log`), and the commands
run in this process with the command line's settings (:func:`train`, :func:`audit`,
:func:`pack`, :func:`compare`, :func:`replay`, :func:`drift`, :func:`check`, and
:func:`run` for any command line). Errors are :class:`LinegateError` and its kinds.
Logs larger than one process: :mod:`linegate.parts` (audit, replay and drift one file
at a time, merged exactly) and :mod:`linegate.dask` (the same on a Dask cluster).

Example::

    import pandas as pd, linegate
    release = linegate.Release.load("model.json", "model.lgmb", public_key="release.pub")
    decisions = release.classify(pd.read_csv("holdout.csv"))
    print(release.model_line, *decisions.lines(), sep="\\n")   # = replay --form device
"""

from ._native import __version__
from .commands import audit, check, compare, drift, pack, replay, run, train
from .errors import CheckFailed, LinegateError, LogError, ReleaseError, UsageError
from .log import Log, read_log
from .release import Decisions, Release
from .results import (
    AuditResult,
    CheckResult,
    CompareResult,
    DriftResult,
    LogFigures,
    PackResult,
    ReplayResult,
    TrainResult,
)

__all__ = [
    "__version__",
    "Release",
    "Decisions",
    "Log",
    "read_log",
    "run",
    "train",
    "audit",
    "pack",
    "compare",
    "replay",
    "drift",
    "check",
    "LinegateError",
    "LogError",
    "UsageError",
    "CheckFailed",
    "ReleaseError",
    "TrainResult",
    "LogFigures",
    "AuditResult",
    "PackResult",
    "CompareResult",
    "ReplayResult",
    "DriftResult",
    "CheckResult",
]
