"""Audit, replay and drift as map-reduce: each file of a log gives a partial result, and
partials merge exactly into the single-process answer, bit for bit.

A *part* is the bytes one file of a log gives (``audit_part``, ``replay_part``,
``drift_part``); ``merge_*`` joins two parts; ``finish_*`` turns the merge of all of a
log's parts into the typed result. What merges how:

- an audit part keeps counts and histogram bins (they add), the smallest margins and the
  largest rounding error (minimum, maximum), and the units it lists by their place in the
  log, so audit parts merge in **any order and grouping**;
- replay and drift parts are sequences (device lines numbered over the log; the CUSUM
  sums, which depend on the units' order), so they merge in **log order**, in any
  grouping: ``merge(merge(a, b), c) == merge(a, merge(b, c))``.

Any engine that maps a function over a list of files and reduces neighbouring results
runs these: :mod:`linegate.dask` on Dask; the README shows Spark's ``mapInPandas``; and
:func:`run_local` here, in this process (the reference the engines are tested against).
The files must be readable where the work runs (a shared file system for a cluster).
"""

from __future__ import annotations

import json
import warnings
from dataclasses import dataclass, field
from os import PathLike
from pathlib import Path
from typing import Any, Callable, Dict, List, Optional, Sequence, Union

from . import _native
from .errors import ReleaseError

__all__ = [
    "log_files",
    "Job",
    "LogAudit",
    "ReplayLines",
    "DriftFigures",
    "merge_audit",
    "merge_replay",
    "merge_drift",
    "prepare",
    "run_local",
    "tree_reduce",
]

PathArg = Union[str, "PathLike[str]"]


def log_files(log: Union[PathArg, Sequence[PathArg]]) -> List[str]:
    """The files of a log, expanded and ordered by the command line's own rule (a quoted
    glob pattern, or a list of files and patterns); a folder means its Parquet files,
    ``<folder>/*.parquet``. Relative paths stay relative: the workers read them from their
    own working folder (give absolute paths on a cluster).

    Raises:
        LogError: when nothing matches (a log of no files is refused, not empty).
    """
    given = [log] if isinstance(log, (str, PathLike)) else list(log)
    if isinstance(log, (str, PathLike)) and Path(log).is_dir():
        given = [str(Path(log) / "*.parquet")]
    return [str(f) for f in _native.log_files([str(g) for g in given])]


def tree_reduce(parts: List[Any], merge: Callable[[Any, Any], Any]) -> Any:
    """Merges neighbouring parts pairwise until one is left: order kept, any engine's
    delayed ``merge`` may stand in for the function."""
    if not parts:
        raise ValueError("no parts to merge")
    while len(parts) > 1:
        parts = [merge(parts[i], parts[i + 1]) if i + 1 < len(parts) else parts[i] for i in range(0, len(parts), 2)]
    return parts[0]


def merge_audit(a: bytes, b: bytes) -> bytes:
    """Two audit parts of one log as one, in either order. Raises ReleaseError for parts
    of different releases or logs."""
    return _native.merge_audit_parts(a, b)


def merge_replay(earlier: bytes, later: bytes) -> bytes:
    """Two replay parts as one: ``earlier``'s units, then ``later``'s."""
    return _native.merge_replay_parts(earlier, later)


def merge_drift(earlier: bytes, later: bytes) -> bytes:
    """Two drift parts as one: ``earlier``'s units, then ``later``'s."""
    return _native.merge_drift_parts(earlier, later)


@dataclass(frozen=True)
class Job:
    """What every part of a run is counted with: the float model's path (readable where
    the work runs), the blob's bytes, the commands' log flags (``["--label", "verdict"]``…)
    and, for an audit, the ``--noise`` entries (``["vibration_mg=2.5"]``) over the noise the
    model declares, exactly as the command line takes them. Each part call checks the blob
    against the model as the commands do (``ReleaseError`` if it is not this model's)."""

    model: str
    blob: bytes
    log_args: List[str] = field(default_factory=list)
    noise: List[str] = field(default_factory=list)

    def audit_part(self, file: str, part: int, name: str) -> bytes:
        """One file's audit part: ``part`` is its place in the log, ``name`` the log's name
        in the audit (``validation-1``, ``holdout``…)."""
        return _native.audit_part(self.model, self.blob, file, name, part, self.noise, self.log_args)

    def replay_part(self, file: str, part: int) -> bytes:
        """One file's replay part: ``part`` is its place in the log."""
        return _native.replay_part(self.model, self.blob, file, part, self.log_args)

    def drift_start(self, audit: str) -> bytes:
        """The empty drift part every file is counted into: the plan of the audit record
        ``audit`` (``audit.json`` or its folder), after checking the blob is the one it
        named."""
        return _native.drift_start(self.model, self.blob, audit)

    def drift_part(self, file: str, part: int, start: bytes) -> bytes:
        """One file's drift part (``part`` its place in the log), counted into a copy of
        ``start``."""
        return _native.drift_part(self.model, self.blob, start, file, part, self.log_args)


@dataclass(frozen=True)
class LogAudit:
    """One log's audit on the device, merged from its parts: the figures ``audit.json``
    keeps for that log (``set``: counts, rates with exact Clopper–Pearson bounds, margin
    and rounding histograms, smallest margin) and the units it lists (in log order;
    ``tightest`` closest first)."""

    name: str
    units: int
    false_go: int
    false_nogo: int
    recheck: int
    faults: int
    flips: int
    min_margin_lsb: Optional[float]
    set: Dict[str, Any] = field(repr=False)
    flipped: List[Dict[str, Any]] = field(repr=False)
    wrong: List[Dict[str, Any]] = field(repr=False)
    tightest: List[Dict[str, Any]] = field(repr=False)
    data: Dict[str, Any] = field(repr=False)

    @staticmethod
    def of(merged: bytes, files: int) -> "LogAudit":
        """The audit of a log of ``files`` files from the merge of all its parts
        (``ReleaseError`` when a file's part is missing or counted twice)."""
        d = json.loads(_native.finish_audit(merged, files))
        s = d["set"]
        return LogAudit(
            name=s["name"],
            units=s["units"],
            false_go=s["false_go"],
            false_nogo=s["false_nogo"],
            recheck=s["recheck"],
            faults=s["faults"],
            flips=s["flips"],
            min_margin_lsb=s.get("min_margin_lsb"),
            set=s,
            flipped=d["flips"],
            wrong=d["wrong"],
            tightest=d["tightest"],
            data=d,
        )


@dataclass(frozen=True)
class ReplayLines:
    """A log replayed through the blob: ``lines`` are exactly ``linegate replay --form
    device``'s output (the model line first), and the outcome counts."""

    lines: List[str]
    units: int
    go: int
    nogo: int
    recheck: int
    faults: int
    skipped: int

    @staticmethod
    def of(merged: bytes, model_line: str, files: int) -> "ReplayLines":
        """The replay of a log of ``files`` files from the merge of all its parts, with the
        release's model line (:attr:`linegate.Release.model_line`). Rows skipped under
        ``--skip-bad-rows`` are counted in ``skipped`` and warned about, as the command
        line warns."""
        d = json.loads(_native.finish_replay(merged, files))
        _warn_skipped(d["skipped"])
        return ReplayLines(
            lines=[model_line] + d["lines"].splitlines(),
            units=d["units"],
            go=d["go"],
            nogo=d["nogo"],
            recheck=d["recheck"],
            faults=d["faults"],
            skipped=d["skipped"]["total"],
        )


@dataclass(frozen=True)
class DriftFigures:
    """A field log against the audit's baseline: the drift report ``linegate drift
    --json`` writes (``in_control`` is ``False`` on any alarm; ``alarms`` say which)."""

    in_control: bool
    alarms: List[str]
    units: int
    skipped: int
    data: Dict[str, Any] = field(repr=False)

    @staticmethod
    def of(audit: PathArg, merged: bytes, files: Sequence[PathArg], alpha: float = 0.01,
           two_sided: bool = False) -> "DriftFigures":
        """The drift report over the field log of ``files`` whose parts merged into
        ``merged``, against the baseline of ``audit``; ``alpha`` and ``two_sided`` as
        ``linegate drift``'s flags (same defaults)."""
        both = json.loads(_native.finish_drift(str(audit), merged, [str(f) for f in files], alpha, two_sided))
        d = both["report"]
        _warn_skipped(both["skipped"])
        return DriftFigures(in_control=not d["alarms"], alarms=d["alarms"], units=d["units"],
                            skipped=both["skipped"]["total"], data=d)


def _warn_skipped(skipped: Dict[str, Any]) -> None:
    if skipped.get("total"):
        reasons = ", ".join(f"{n} {r}" for r, n in skipped.get("by_reason", {}).items())
        warnings.warn(f"skipped {skipped['total']} rows under --skip-bad-rows ({reasons})", stacklevel=3)


def prepare(command: str, log: Union[PathArg, Sequence[PathArg]], model: PathArg, blob: PathArg, *,
            public_key: Optional[PathArg] = None, log_args: Sequence[str] = (),
            noise: Optional[Dict[str, float]] = None, project: Optional[PathArg] = None,
            no_project: bool = False) -> "tuple[Job, List[str], Any, Dict[str, List[str]]]":
    """What every part of one run needs, checked once in this process: the log's files
    (:func:`log_files`) checked to make one log as the command checks (no file twice, the
    same channel columns), the settings resolved as ``command`` resolves them (``log_args``
    and ``noise`` as given, then the project file's keys: ``project``, else
    ``linegate.toml`` here unless ``no_project``), and the release (blob of this model,
    signed by ``public_key`` when given, or by the project file's public key). Returns the
    job, the files, the release and the command's other settings (flag → values:
    ``--alpha``, ``--two-sided`` for a drift). A flag given in ``log_args`` that the parts
    cannot apply (``--form``, a gate) is refused rather than ignored.

    Raises:
        TypeError: ``log_args`` given as one string (give a list of flags).
        ReleaseError, LogError, UsageError: as the command would.
    """
    from .errors import UsageError
    from .release import Release

    if isinstance(log_args, (str, bytes)):
        raise TypeError("log_args: a list of flags, e.g. ['--label', 'verdict'], not one string")
    given = [str(a) for a in log_args]
    for k, v in (noise or {}).items():
        given += ["--noise", f"{k}={float(v)!r}"]
    flags, noise_entries, other = _native.resolve(command, str(model), given,
                                                  None if project is None else str(project), no_project)
    settings = {flag: values for flag, values, _ in other}
    applied = {"--public-key"} | ({"--alpha", "--two-sided"} if command == "drift" else set())
    # --model and the log are this call's own; any other flag given must be one the parts apply.
    refused = [flag for flag, _, source in other
               if source == "flag" and flag.startswith("--") and flag not in applied | {"--model"}]
    if refused:
        raise UsageError(f"log_args: {', '.join(refused)} is not a setting the parts apply (only the log flags"
                         f"{', --noise' if command == 'audit' else ''} and {', '.join(sorted(applied))})")
    if public_key is None and settings.get("--public-key"):
        public_key = settings["--public-key"][0]
    blob_bytes = Path(blob).read_bytes()
    release = Release.load(model, blob, public_key=public_key)
    if Path(blob).read_bytes() != blob_bytes:
        raise ReleaseError(f"{blob}: changed while it was being checked")
    files = log_files(log)
    _native.check_log(command, str(model), files, flags)
    job = Job(str(Path(model).resolve()), blob_bytes, flags, noise_entries if command == "audit" else [])
    return job, files, release, settings


def run_local(kind: str, files: Sequence[str], job: Job, **kw: Any) -> bytes:
    """Runs one kind of parts (``audit``, ``replay``, ``drift``) over ``files`` in this
    process and returns the merged part: the reference an engine's run equals."""
    if kind == "audit":
        parts = [job.audit_part(f, k, kw["name"]) for k, f in enumerate(files)]
        return tree_reduce(parts, _native.merge_audit_parts)
    if kind == "replay":
        return tree_reduce([job.replay_part(f, k) for k, f in enumerate(files)], _native.merge_replay_parts)
    if kind == "drift":
        start = job.drift_start(kw["audit"])
        return tree_reduce([job.drift_part(f, k, start) for k, f in enumerate(files)], _native.merge_drift_parts)
    raise ValueError(f"{kind}: not a kind of parts (audit, replay or drift)")
