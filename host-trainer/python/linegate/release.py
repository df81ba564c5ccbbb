"""A release (float model + blob) and classification by the device kernel.

``Release.classify`` gives the device's decisions bit for bit: physical readings are
converted to raw counts exactly as the log reader converts them for ``linegate replay``
(``ChannelScale::to_raw``; a reading outside the channel's range kept as the device's
count, so the kernel refuses it as the device does: ``FAULT ch<k>``), then run through the
same integer kernel (``shared_model``'s ``classify_windows``) the firmware runs.
"""

from __future__ import annotations

import warnings

from dataclasses import dataclass
from os import PathLike
from typing import TYPE_CHECKING, Any, List, Optional, Union

import numpy as np

from . import _native

if TYPE_CHECKING:  # pragma: no cover
    import pandas

__all__ = ["Release", "Decisions"]

PathArg = Union[str, "PathLike[str]"]


@dataclass(frozen=True)
class Decisions:
    """The device's decision for every unit (row), in row order.

    Attributes:
        verdict: ``"GO"``, ``"NO-GO"``, ``"RECHECK"`` or ``"FAULT"`` per unit (numpy str).
        score: the kernel's integer score (int64; a model of several classes: the leading
            class's lead over the runner-up); 0 for a FAULT.
        fault: ``"ch<k>"`` for a FAULT (the refused channel's index, as the device prints
            it), else ``""``.
        fault_channel: the refused channel's name for a FAULT, else ``""``.
        class_name: a model of several classes: the leading class's name (decided or
            RECHECK; ``""`` for a FAULT); ``None`` for a two-sided model.
    """

    verdict: np.ndarray
    score: np.ndarray
    fault: np.ndarray
    fault_channel: np.ndarray
    class_name: Optional[np.ndarray]
    _lines: str

    def __len__(self) -> int:
        return len(self.verdict)

    def lines(self) -> List[str]:
        """The device's line per unit, exactly as ``linegate replay --form device`` prints
        them after its first (``# model …``) line: ``<index> GO 1234``, ``<index> FAULT
        ch2``, ``<index> NO-GO 57 bearing`` (index from 0 in row order)."""
        return self._lines.splitlines()

    def to_frame(self) -> "pandas.DataFrame":
        """The decisions as a pandas DataFrame (columns verdict, score, fault,
        fault_channel and, for a model of several classes, class)."""
        import pandas as pd

        cols = {
            "verdict": self.verdict,
            "score": self.score,
            "fault": self.fault,
            "fault_channel": self.fault_channel,
        }
        if self.class_name is not None:
            cols["class"] = self.class_name
        return pd.DataFrame(cols)


class Release:
    """A float model with its blob, checked as ``linegate replay`` checks them.

    Load with :meth:`load`; classify with :meth:`classify` (a DataFrame or a float array
    of physical readings) or :meth:`classify_raw` (the device's integer counts).
    """

    def __init__(self, native: "_native.Release") -> None:
        """Wraps a loaded native release; use :meth:`Release.load`."""
        self._r = native

    @classmethod
    def load(
        cls,
        model: PathArg,
        blob: Optional[PathArg] = None,
        public_key: Optional[PathArg] = None,
    ) -> "Release":
        """Loads the float model file ``model`` and the blob ``blob`` (``.lgmb``).

        The checks are replay's: the blob must decode and be one this model produces;
        with ``public_key`` (a ``.pub`` file from ``linegate key new``) its signature must
        be valid for that key (unsigned, another key's or changed after signing is
        refused). Without ``blob`` the model is quantised plainly at 16-bit words, as
        ``linegate values`` does without ``--blob``: not a release, so its scores may differ
        from a packed blob's (a ``UserWarning`` says so; ``blob_id`` is then ``None``).

        Raises:
            ReleaseError: the blob is damaged, not of this model, or its signature fails.
            LogError: the model, blob or key file cannot be read (file named).
        """
        if blob is None:
            warnings.warn(
                f"{model}: no blob given, so the model is quantised plainly at 16-bit words "
                "(as `linegate values` does): scores may differ from a packed blob's; give "
                "blob= for the device's decisions",
                stacklevel=2,
            )
        return cls(
            _native.Release.load(
                str(model),
                None if blob is None else str(blob),
                None if public_key is None else str(public_key),
            )
        )

    @property
    def model_id(self) -> str:
        """The model id (32 hex digits)."""
        return self._r.model_id

    @property
    def blob_id(self) -> Optional[str]:
        """The blob's id (its CRC-32, 8 hex digits); ``None`` without a blob."""
        return self._r.blob_id

    @property
    def key_id(self) -> Optional[str]:
        """The signing key's id for a signed blob, else ``None``."""
        return self._r.key_id

    @property
    def channels(self) -> List[str]:
        """The channels' names in the model's (and the arrays') order."""
        return self._r.channels

    @property
    def columns(self) -> List[str]:
        """The log column each channel is read from (its name unless the model keeps an
        alias)."""
        return self._r.columns

    @property
    def classes(self) -> Optional[List[str]]:
        """The class names of a model of several classes; ``None`` for GO / NO-GO."""
        return self._r.classes

    @property
    def model_line(self) -> Optional[str]:
        """The device's first line, ``# model <id> blob <blob id>[ key <key id>]``."""
        return self._r.model_line

    def classify(self, data: Any) -> Decisions:
        """Classifies physical readings with the device kernel.

        Args:
            data: a pandas DataFrame (each channel's column found by the model's log
                column name, compared without ASCII case as the log reader compares;
                other columns ignored), or a 2-D array ``units × channels`` of floats in
                :attr:`channels` order.

        Raises:
            LogError: a NaN, an infinity or a value beyond 1e15 (``line`` = row from 0,
                ``column`` = its column), a channel with no column, or a column that is
                not numeric.
            UsageError: an array with another number of columns, or a model with signal
                features (its units are sample windows: use :func:`linegate.replay`).
        """
        if hasattr(data, "columns") and hasattr(data, "iloc"):
            names = [str(c) for c in data.columns]
            places = self._r.column_places(names, "<DataFrame>")
            used = [names[k] for k in places]
            cols = []
            for k in places:
                col = data.iloc[:, k]
                try:
                    cols.append(np.asarray(col, dtype=np.float64))
                except (TypeError, ValueError) as e:
                    from .errors import LogError

                    raise LogError(
                        f"<DataFrame>: column '{names[k]}' is not numeric ({e})",
                        "<DataFrame>",
                        None,
                        names[k],
                    ) from None
            x = (
                np.column_stack(cols)
                if cols
                else np.zeros((len(data), 0), dtype=np.float64)
            )
            return self._decisions(
                self._r.classify(np.ascontiguousarray(x), used, "<DataFrame>")
            )
        x = np.ascontiguousarray(np.asarray(data, dtype=np.float64))
        if x.ndim != 2:
            from .errors import UsageError

            raise UsageError(f"expected a 2-D array (units × channels), got {x.ndim} dimensions")
        return self._decisions(self._r.classify(x, list(self.channels), "<array>"))

    def classify_raw(self, raw: Any) -> Decisions:
        """Classifies raw readings (the device's integer counts, ``units × channels``,
        converted to int32; a value outside int32 is refused by numpy) with the device
        kernel: what the device does with the counts its converters give."""
        x = np.asarray(raw)
        if x.ndim != 2:
            from .errors import UsageError

            raise UsageError(f"expected a 2-D array (units × channels), got {x.ndim} dimensions")
        if x.dtype != np.int32:
            info = np.iinfo(np.int32)
            if x.size and (x.min() < info.min or x.max() > info.max):
                from .errors import UsageError

                raise UsageError("raw readings must fit int32 (the device's counts)")
            x = x.astype(np.int32)
        return self._decisions(self._r.classify_raw(np.ascontiguousarray(x)))

    def _decisions(self, d: dict) -> Decisions:
        """The native dict of codes → :class:`Decisions` (names looked up by index)."""
        codes = np.asarray(d["verdict"], dtype=np.intp)
        verdict = np.array(d["verdict_names"])[codes]
        fc = np.asarray(d["fault_channel"], dtype=np.intp)
        n = len(self.channels)
        # A refused channel k: "ch<k>" (as the device's line says) and its name; -2 is a
        # fault of another kind (not reachable with a checked column count).
        tags = np.array([f"ch{k}" for k in range(n)] + ["other", ""])
        names = np.array(list(self.channels) + ["", ""])
        pick = np.where(fc >= 0, fc, np.where(codes == 3, n, n + 1))
        class_name = None
        if self.classes is not None:
            ci = np.asarray(d["class_index"], dtype=np.intp)
            cnames = np.array(list(self.classes) + [""])
            class_name = cnames[np.where(ci >= 0, ci, len(self.classes))]
        return Decisions(
            verdict=verdict,
            score=d["score"],
            fault=tags[pick],
            fault_channel=names[pick],
            class_name=class_name,
            _lines=d["lines"],
        )

    def __repr__(self) -> str:
        return f"Release(model_id={self.model_id!r}, blob_id={self.blob_id!r}, channels={self.channels!r})"
