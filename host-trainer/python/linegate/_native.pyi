"""Stubs of ``linegate._native``, the Rust side of the package (see ``src/``)."""

from typing import Dict, List, Optional, Tuple

import numpy as np
import numpy.typing as npt

__version__: str

class Release:
    """A float model with its blob (or quantised plainly), checked as replay checks."""

    @staticmethod
    def load(model: str, blob: Optional[str] = None, public_key: Optional[str] = None) -> "Release":
        """Loads and checks a release; raises ReleaseError, LogError or UsageError."""
    @property
    def model_id(self) -> str:
        """The model id (32 hex digits)."""
    @property
    def blob_id(self) -> Optional[str]:
        """The blob's CRC-32 (8 hex digits), or None without a blob."""
    @property
    def key_id(self) -> Optional[str]:
        """The signing key's id, or None for an unsigned blob."""
    @property
    def model_line(self) -> Optional[str]:
        """The device's first line, or None without a blob."""
    @property
    def channels(self) -> List[str]:
        """The channels' names."""
    @property
    def columns(self) -> List[str]:
        """Each channel's log column."""
    @property
    def signals(self) -> List[str]:
        """The signals' names (models with signal features)."""
    @property
    def classes(self) -> Optional[List[str]]:
        """The class names in the blob's row order, or None for a two-sided model."""
    def column_places(self, names: List[str], source: str) -> List[int]:
        """Each channel's index among ``names``; LogError when missing or doubled."""
    def classify(self, physical: npt.NDArray[np.float64], names: List[str], source: str) -> Dict[str, object]:
        """Physical readings (n × channels) → decisions dict: verdict (uint8 codes into
        verdict_names), verdict_names, score (int64), fault_channel (int32, -1 none,
        -2 another fault), class_index (int32, -1 none), lines (str, one per unit)."""
    def classify_raw(self, raw: npt.NDArray[np.int32]) -> Dict[str, object]:
        """Raw counts (n × channels) → the same dict as ``classify``."""

def read_log(args: List[str]) -> Dict[str, object]:
    """The log ``args`` names (files, --model, --sheet, log flags) as arrays: raw (int32
    n×d), physical (float64 n×d), labels (int8), class_index (int32), classes, lines
    (uint64), unit_ids (list or None), channels, files, part_of (uint32), skipped."""

def run(args: List[str]) -> int:
    """``linegate <args…>`` in process; 0, or raises the package's exceptions."""

def project_values(command: str, project: Optional[str] = None) -> Dict[str, List[str]]:
    """What the project file gives ``command``'s arguments (argument id → values)."""

# Audit, replay and drift one file at a time (linegate.parts says what merges how).
def resolve(command: str, model: str, flags: List[str], project: Optional[str] = None, no_project: bool = False) -> Tuple[List[str], List[str], List[Tuple[str, List[str], str]]]:
    """The command's settings: explicit log flags, --noise entries, other (flag, values, source)."""
def log_files(given: List[str]) -> List[str]:
    """The log's files, expanded and ordered as the commands expand them."""
def check_log(command: str, model: str, files: List[str], flags: List[str]) -> None:
    """Refuses files that do not make one log (a file twice, channel columns that differ)."""
def audit_part(model: str, blob: bytes, file: str, name: str, part: int, noise: List[str] = ..., log_args: List[str] = ...) -> bytes:
    """One file of a log audited as ``linegate audit`` audits the log it names ``name``."""
def merge_audit_parts(a: bytes, b: bytes) -> bytes:
    """Two audit parts of one log as one (either order); ReleaseError for other releases or logs."""
def finish_audit(part: bytes, files: int) -> str:
    """The audit (JSON) of a log of ``files`` files from the merge of all its parts."""
def replay_part(model: str, blob: bytes, file: str, part: int, log_args: List[str] = ...) -> bytes:
    """One file through the blob: device lines numbered from 0, and counts."""
def merge_replay_parts(earlier: bytes, later: bytes) -> bytes:
    """``earlier``'s units, then ``later``'s (renumbered)."""
def finish_replay(part: bytes, files: int) -> str:
    """The lines (without the model line) and counts, as JSON."""
def drift_start(model: str, blob: bytes, audit: str) -> bytes:
    """The empty drift part of the audit record's plan (the blob checked against it)."""
def drift_part(model: str, blob: bytes, start: bytes, file: str, part: int, log_args: List[str] = ...) -> bytes:
    """One file of a field log counted into a copy of ``start``."""
def merge_drift_parts(earlier: bytes, later: bytes) -> bytes:
    """``earlier``'s units, then ``later``'s (the CUSUMs composed)."""
def finish_drift(audit: str, merged: bytes, files: List[str], alpha: float = 0.01, two_sided: bool = False) -> str:
    """``{"report": linegate drift --json's report, "skipped": the skip report}`` as JSON."""
