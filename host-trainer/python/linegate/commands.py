"""The commands, run in this process by the same code as the ``linegate`` binary.

Each function builds the command line from its keyword arguments (``max_false_go=0.01``
→ ``--max-false-go 0.01``, ``True`` → the bare flag, a list → the flag once per item,
``project=`` → ``--project``), so the settings are the CLI's by construction (the project
file included: ``linegate.toml`` in the working folder unless ``no_project=True``), runs
it, and reads its typed result from what the command wrote. Progress and summaries are
off unless ``quiet=False`` (they go to the process's stdout/stderr, as the binary's).

Exit 1 of the binary (a check ran and failed) is :class:`CheckFailed`; for ``audit``,
``compare``, ``drift`` and ``check`` the failed result is returned with ``passed=False``
(or ``separable=False``) unless ``check=True``, which raises with the result attached.
"""

from __future__ import annotations

import hashlib
import json
import os
import sys
import tempfile
from contextlib import contextmanager
from os import PathLike
from pathlib import Path
from typing import Any, Dict, Iterator, List, Optional, Sequence, Union

from . import _native
from ._argv import flags
from .errors import CheckFailed
from .release import Release
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

__all__ = ["run", "train", "audit", "pack", "compare", "replay", "drift", "check"]

PathArg = Union[str, "PathLike[str]"]
Logs = Union[None, PathArg, Sequence[PathArg]]


def run(argv: Sequence[str]) -> int:
    """Runs ``linegate <argv…>`` in this process (``argv`` without the program name).

    Returns 0 on success (``--help`` and ``--version`` print and return 0).

    Raises:
        CheckFailed: where the binary exits 1.
        UsageError, LogError, LinegateError: where it exits 2.
    """
    return _native.run([str(a) for a in argv])


def _logs(logs: Logs) -> List[str]:
    if logs is None:
        return []
    if isinstance(logs, (str, PathLike)):
        return [str(logs)]
    return [str(p) for p in logs]


def _argv(command: str, logs: Logs, options: Dict[str, Any], quiet: bool) -> List[str]:
    return [command] + _logs(logs) + flags(options) + (["--quiet"] if quiet else [])


def _project_value(command: str, arg: str, options: Dict[str, Any]) -> Optional[str]:
    """What the project file gives ``arg`` of ``command`` (the file the options name)."""
    if options.get("no_project"):
        return None
    project = options.get("project")
    values = _native.project_values(command, None if project is None else str(project))
    v = values.get(arg)
    return v[0] if v else None


@contextmanager
def _stdout_to(path: Path) -> Iterator[None]:
    """Standard output (file descriptor 1, where the Rust side prints) into ``path``."""
    sys.stdout.flush()
    saved = os.dup(1)
    with open(path, "wb") as f:
        os.dup2(f.fileno(), 1)
        try:
            yield
        finally:
            os.dup2(saved, 1)
            os.close(saved)


def _json_of_stdout(argv: List[str]) -> "tuple[Dict[str, Any], Optional[CheckFailed]]":
    """Runs ``argv`` (with ``--json``) and parses what it prints; a ``CheckFailed`` is
    returned beside the JSON the command printed before failing."""
    out = Path(tempfile.mkdtemp(prefix="linegate-")) / "stdout.json"
    failed: Optional[CheckFailed] = None
    with _stdout_to(out):
        try:
            _native.run(argv)
        except CheckFailed as e:
            failed = e
    text = out.read_text(encoding="utf-8")
    if not text.strip():
        if failed is not None:
            raise failed
        return {}, None
    return json.loads(text), failed


def _settle(result: Any, failed: Optional[CheckFailed], check: bool) -> Any:
    if failed is not None and check:
        raise CheckFailed(failed.message, result)
    return result


def train(logs: Logs = None, *, output: Optional[PathArg] = None, quiet: bool = True, **options: Any) -> TrainResult:
    """``linegate train``: trains a float model from a bench log.

    ``output`` (``-o``) defaults to the project file's ``[outputs] model``, else a new
    file in a temporary folder (its path is ``result.model``).
    """
    out = output if output is not None else _project_value("train", "output", options)
    if out is None:
        out = Path(tempfile.mkdtemp(prefix="linegate-")) / "model.json"
    _native.run(_argv("train", logs, {**options, "output": str(out)}, quiet))
    data = json.loads(Path(out).read_text(encoding="utf-8"))
    classes = data.get("classes")
    return TrainResult(
        model=Path(out),
        model_id=data.get("model_id", ""),
        channels=[c.get("name", "") for c in data.get("channels", [])],
        classes=[r.get("name") for r in classes.get("rows", [])] if isinstance(classes, dict) else None,
        data=data,
    )


def _figures(s: Dict[str, Any]) -> LogFigures:
    return LogFigures(
        name=str(s.get("name", "")),
        path=str(s.get("path", "")),
        units=int(s.get("units", 0)),
        false_go=s.get("false_go"),
        false_nogo=s.get("false_nogo"),
        recheck=s.get("recheck"),
        faults=s.get("faults"),
        flips=s.get("flips"),
        min_margin_lsb=s.get("min_margin_lsb"),
        data=s,
    )


def audit(*, out_dir: Optional[PathArg] = None, check: bool = False, quiet: bool = True, **options: Any) -> AuditResult:
    """``linegate audit``: quantises and runs the release audit.

    The report folder (``--out-dir``) defaults to the project file's ``[outputs]
    audit_dir``, else a new temporary folder; the result is read from its
    ``audit.json``. A failed audit returns ``passed=False`` with its ``reasons``;
    ``check=True`` raises :class:`CheckFailed` instead (``.result`` holds the result).
    """
    d = out_dir if out_dir is not None else _project_value("audit", "report_dir", options)
    if d is None:
        d = Path(tempfile.mkdtemp(prefix="linegate-audit-"))
    failed: Optional[CheckFailed] = None
    try:
        _native.run(_argv("audit", None, {**options, "out_dir": str(d)}, quiet))
    except CheckFailed as e:
        failed = e
    path = Path(d) / "audit.json"
    if failed is not None and not path.is_file():
        raise failed
    data = json.loads(path.read_text(encoding="utf-8"))
    result = AuditResult(
        passed=bool(data.get("passed", failed is None)),
        reasons=list(data.get("reasons", [])),
        logs=[_figures(s) for s in data.get("sets", data.get("logs", []))],
        model_id=data.get("model_id"),
        blob_id=data.get("blob_id"),
        out_dir=Path(d),
        json=path,
        data=data,
    )
    return _settle(result, failed, check)


def pack(*, output: Optional[PathArg] = None, quiet: bool = True, **options: Any) -> PackResult:
    """``linegate pack``: quantises, audits and writes the blob only if the audit passes
    (a failed audit raises :class:`CheckFailed`: nothing is written).

    ``output`` (``-o``) defaults to the project file's ``[outputs] blob``, else a new
    temporary file; the ids are read back from the blob with its model.
    """
    out = output if output is not None else _project_value("pack", "output", options)
    if out is None:
        out = Path(tempfile.mkdtemp(prefix="linegate-")) / "model.lgmb"
    _native.run(_argv("pack", None, {**options, "output": str(out)}, quiet))
    blob = Path(out)
    raw = blob.read_bytes()
    model = options.get("model") or _project_value("pack", "model", options)
    ids: Dict[str, Optional[str]] = {"blob_id": None, "key_id": None, "model_id": None}
    if model is not None and blob.suffix == ".lgmb":
        r = Release.load(model, blob)
        ids = {"blob_id": r.blob_id, "key_id": r.key_id, "model_id": r.model_id}
    return PackResult(blob=blob, sha256=hashlib.sha256(raw).hexdigest(), size=len(raw), **ids)


def compare(logs: Logs = None, *, json_out: Optional[PathArg] = None, check: bool = False, quiet: bool = True, **options: Any) -> CompareResult:
    """``linegate compare``: release A (``model``/``blob``) against B (``against``/
    ``against_blob``) over the same log.

    The comparison is read from ``--json`` (``json_out``, else a temporary file). A
    NO-GO→GO gate that fails returns ``passed=False``; ``check=True`` raises.
    """
    path = Path(json_out) if json_out is not None else Path(tempfile.mkdtemp(prefix="linegate-")) / "compare.json"
    failed: Optional[CheckFailed] = None
    try:
        _native.run(_argv("compare", logs, {**options, "json": str(path)}, quiet))
    except CheckFailed as e:
        failed = e
    if failed is not None and not path.is_file():
        raise failed
    data = json.loads(path.read_text(encoding="utf-8"))
    gate = data.get("gate", {})
    result = CompareResult(
        passed=bool(gate.get("passed", failed is None)),
        units=int(data.get("units", 0)),
        nogo_to_go=int(gate.get("nogo_to_go", 0)),
        recheck_to_go=int(gate.get("recheck_to_go", 0)),
        transitions=list(data.get("transitions", [])),
        changes=list(data.get("changes", [])),
        json=path,
        data=data,
    )
    return _settle(result, failed, check)


def replay(logs: Logs = None, *, form: str = "device", output: Optional[PathArg] = None, quiet: bool = True, **options: Any) -> ReplayResult:
    """``linegate replay``: the device kernel over a log (bench or signal log), its lines
    in ``form`` (device, text, csv, json), written to ``output`` (else a temporary file)
    and returned as ``lines``."""
    out = Path(output) if output is not None else Path(tempfile.mkdtemp(prefix="linegate-")) / "replay.txt"
    _native.run(_argv("replay", logs, {**options, "form": form, "output": str(out)}, quiet))
    return ReplayResult(lines=out.read_text(encoding="utf-8").splitlines(), form=form, output=out)


def drift(logs: Logs = None, *, check: bool = False, quiet: bool = True, **options: Any) -> DriftResult:
    """``linegate drift``: a field log (or ``lines=``/``record=``) against the audit's
    baseline (``audit=``); read from its ``--json``. An alarm returns ``passed=False``
    (``alarms`` say which); ``check=True`` raises."""
    data, failed = _json_of_stdout(_argv("drift", logs, {**options, "json": True}, quiet))
    result = DriftResult(
        passed=failed is None and not data.get("alarms"),
        alarms=list(data.get("alarms", [])),
        units=data.get("units"),
        data=data,
    )
    return _settle(result, failed, check)


def check(logs: Logs = None, *, check: bool = False, quiet: bool = True, **options: Any) -> CheckResult:
    """``linegate check``: the exact separability test of a bench log, read from its
    ``--json``. A log that is not separable returns ``separable=False``;
    ``check=True`` raises :class:`CheckFailed`."""
    data, failed = _json_of_stdout(_argv("check", logs, {**options, "json": True}, quiet))
    result = CheckResult(
        separable=bool(data.get("separable", failed is None)),
        margin=data.get("margin"),
        units=int(data.get("units", 0)),
        data=data,
    )
    return _settle(result, failed, check)
