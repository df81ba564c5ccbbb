"""Replay, audit and drift on Dask: one task per file of the log, neighbouring parts merged
pairwise as a tree of tasks, the finished result read in this process. The answer equals
the single-process command line on the same files, bit for bit (:mod:`linegate.parts`
says why).

Example (a local cluster of worker processes; any ``dask.distributed`` cluster whose
workers can read the files and import ``linegate`` does the same)::

    from dask.distributed import Client, LocalCluster
    import linegate.dask

    if __name__ == "__main__":
        with LocalCluster(n_workers=4, threads_per_worker=1) as cluster, Client(cluster) as client:
            a = linegate.dask.audit("fleet/", "model.json", "model.lgmb", name="validation-1")
            print(a.units, a.false_go, a.set["rates"]["false_go"]["upper"])

Without a client the active one is used, or Dask's default scheduler. Needs
``pip install "dask[distributed]"``.
"""

from __future__ import annotations

from typing import Any, Dict, Optional, Sequence, Union

from . import _native
from .parts import DriftFigures, LogAudit, PathArg, ReplayLines, prepare, tree_reduce

__all__ = ["audit", "replay", "drift"]

Log = Union[PathArg, Sequence[PathArg]]


def _dask():
    try:
        import dask
    except ImportError as e:  # pragma: no cover - said to the user
        raise ImportError('linegate.dask needs Dask: pip install "dask[distributed]"') from e
    return dask


def _compute(delayed: Any, client: Any) -> bytes:
    if client is not None:
        out = client.compute(delayed).result()
    else:
        out = delayed.compute()
    if isinstance(out, _Failed):
        raise out.error
    return out


class _Failed:
    """A file's failure carried through the merges, so the earliest file's error is the one
    raised whatever order the workers finish in (as the command line meets it first)."""

    def __init__(self, place: int, error: BaseException) -> None:
        self.place, self.error = place, error


def _part(fn: Any, place: int, *args: Any) -> Any:
    try:
        return fn(*args)
    except Exception as e:  # a file's error: kept for the earliest-file rule
        return _Failed(place, e)


def _merge(fn: Any, a: Any, b: Any) -> Any:
    failed = [x for x in (a, b) if isinstance(x, _Failed)]
    if failed:
        return min(failed, key=lambda f: f.place)
    return fn(a, b)


def _tasks(dask: Any, fn: Any, merge: Any, args: Sequence[tuple]) -> Any:
    parts = [dask.delayed(_part, pure=True)(fn, k, *a) for k, a in enumerate(args)]
    return tree_reduce(parts, lambda a, b: dask.delayed(_merge, pure=True)(merge, a, b))


def audit(log: Log, model: PathArg, blob: PathArg, *, name: str, client: Any = None,
          public_key: Optional[PathArg] = None, noise: Optional[Dict[str, float]] = None,
          log_args: Sequence[str] = (), project: Optional[PathArg] = None,
          no_project: bool = False) -> LogAudit:
    """The release's audit of ``log`` (a glob pattern, a list of files, or a folder's
    Parquet files: one task each), as ``linegate audit`` reports the log it names ``name``
    (``validation-1``, ``holdout``…): counts, rates with exact bounds, histograms, the
    listed units. ``noise`` (channel → physical units) and ``log_args`` are the command's
    ``--noise`` and log flags; the project file is read as the command reads it
    (``project``, else ``linegate.toml`` here unless ``no_project``).

    Raises:
        ReleaseError: the blob is not this model's, or not signed by ``public_key``.
        LogError: a file's error, with its file, line and column; files that are not one log.
    """
    dask = _dask()
    job, files, _, _ = prepare("audit", log, model, blob, public_key=public_key, log_args=log_args, noise=noise,
                               project=project, no_project=no_project)
    merged = _tasks(dask, _native.audit_part, _native.merge_audit_parts,
                    [(job.model, job.blob, f, name, k, job.noise, job.log_args) for k, f in enumerate(files)])
    return LogAudit.of(_compute(merged, client), len(files))


def replay(log: Log, model: PathArg, blob: PathArg, *, client: Any = None,
           public_key: Optional[PathArg] = None, log_args: Sequence[str] = (),
           project: Optional[PathArg] = None, no_project: bool = False) -> ReplayLines:
    """``log`` through the blob's kernel: exactly ``linegate replay --form device``'s lines
    (model line first, units numbered over the whole log) and the outcome counts. The lines
    of the whole log come back to this process."""
    dask = _dask()
    job, files, release, _ = prepare("replay", log, model, blob, public_key=public_key, log_args=log_args,
                                     project=project, no_project=no_project)
    merged = _tasks(dask, _native.replay_part, _native.merge_replay_parts,
                    [(job.model, job.blob, f, k, job.log_args) for k, f in enumerate(files)])
    return ReplayLines.of(_compute(merged, client), release.model_line or "", len(files))


def drift(log: Log, model: PathArg, blob: PathArg, audit: PathArg, *, client: Any = None,
          public_key: Optional[PathArg] = None, log_args: Sequence[str] = (),
          alpha: Optional[float] = None, two_sided: Optional[bool] = None,
          project: Optional[PathArg] = None, no_project: bool = False) -> DriftFigures:
    """``log`` (the field) against the baseline the release's audit kept (``audit``: its
    ``audit.json`` or folder): the report ``linegate drift --json`` writes, ``alpha`` and
    ``two_sided`` as its flags (left out: the project file's, else the command's defaults,
    0.01 and one-sided). The per-unit CUSUM chart is not drawn (the report's JSON
    never holds it); every scored unit's score comes back to this process (8 bytes each)."""
    dask = _dask()
    job, files, _, settings = prepare("drift", log, model, blob, public_key=public_key, log_args=log_args,
                                      project=project, no_project=no_project)
    if alpha is None:
        alpha = float(settings.get("--alpha", ["0.01"])[0])
    if two_sided is None:
        two_sided = settings.get("--two-sided", ["false"])[0] == "true"
    start = job.drift_start(str(audit))
    merged = _tasks(dask, _native.drift_part, _native.merge_drift_parts,
                    [(job.model, job.blob, start, f, k, job.log_args) for k, f in enumerate(files)])
    return DriftFigures.of(audit, _compute(merged, client), files, alpha, two_sided)
