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
        return client.compute(delayed).result()
    return delayed.compute()


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
    job, files, _ = prepare("audit", log, model, blob, public_key=public_key, log_args=log_args, noise=noise,
                            project=project, no_project=no_project)
    parts = [dask.delayed(_native.audit_part, pure=True)(job.model, job.blob, f, name, k, job.noise, job.log_args)
             for k, f in enumerate(files)]
    merged = tree_reduce(parts, dask.delayed(_native.merge_audit_parts, pure=True))
    return LogAudit.of(_compute(merged, client))


def replay(log: Log, model: PathArg, blob: PathArg, *, client: Any = None,
           public_key: Optional[PathArg] = None, log_args: Sequence[str] = (),
           project: Optional[PathArg] = None, no_project: bool = False) -> ReplayLines:
    """``log`` through the blob's kernel: exactly ``linegate replay --form device``'s lines
    (model line first, units numbered over the whole log) and the outcome counts. The lines
    of the whole log come back to this process."""
    dask = _dask()
    job, files, release = prepare("replay", log, model, blob, public_key=public_key, log_args=log_args,
                                  project=project, no_project=no_project)
    parts = [dask.delayed(_native.replay_part, pure=True)(job.model, job.blob, f, k, job.log_args)
             for k, f in enumerate(files)]
    merged = tree_reduce(parts, dask.delayed(_native.merge_replay_parts, pure=True))
    return ReplayLines.of(_compute(merged, client), release.model_line or "", len(files))


def drift(log: Log, model: PathArg, blob: PathArg, audit: PathArg, *, client: Any = None,
          public_key: Optional[PathArg] = None, log_args: Sequence[str] = (),
          alpha: float = 0.01, two_sided: bool = False, project: Optional[PathArg] = None,
          no_project: bool = False) -> DriftFigures:
    """``log`` (the field) against the baseline the release's audit kept (``audit``: its
    ``audit.json`` or folder): the report ``linegate drift --json`` writes, ``alpha`` and
    ``two_sided`` as its flags. The per-unit CUSUM chart is not drawn (the report's JSON
    never holds it); every scored unit's score comes back to this process (8 bytes each)."""
    dask = _dask()
    job, files, _ = prepare("drift", log, model, blob, public_key=public_key, log_args=log_args,
                            project=project, no_project=no_project)
    start = job.drift_start(str(audit))
    parts = [dask.delayed(_native.drift_part, pure=True)(job.model, job.blob, start, f, k, job.log_args)
             for k, f in enumerate(files)]
    merged = tree_reduce(parts, dask.delayed(_native.merge_drift_parts, pure=True))
    return DriftFigures.of(audit, _compute(merged, client), files, alpha, two_sided)
