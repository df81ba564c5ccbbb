"""read_log against pandas.read_csv (the outside reference for the cells), and LogError's
file, line and column on a broken log."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

import linegate
from conftest import read_toml


def test_read_log_equals_pandas(demo):
    log = linegate.read_log(demo / "holdout-synthetic.csv", model=demo / "model.json")
    ref = pd.read_csv(demo / "holdout-synthetic.csv")  # pandas reads the same file
    r = linegate.Release.load(demo / "model.json", demo / "model.lgmb")
    assert log.channels == r.channels
    assert log.raw.dtype == np.int32 and log.raw.shape == (len(ref), len(r.channels))
    assert log.unit_ids == list(ref["unit_id"])
    # Lines: the header is line 1, so row i is line i + 2.
    assert list(log.lines) == list(range(2, len(ref) + 2))
    # Labels: +1 GO, -1 NO-GO, as the file says.
    assert list(log.labels) == [1 if v == "GO" else -1 for v in ref["verdict"]]
    assert [log.classes[k] for k in log.class_index] == list(ref["verdict"])
    # Physical values are the cells to within half an lsb of each channel (the channel
    # sheet's lsb), and the raw counts are the cells divided by it, rounded.
    sheet = {c["name"]: c for c in read_toml(demo / "channels.toml")["channel"]}
    for k, name in enumerate(log.channels):
        lsb, zero = sheet[name]["lsb"], sheet[name].get("zero", 0.0)
        cells = ref[name].to_numpy(dtype=float)
        assert np.all(np.abs(log.physical[:, k] - cells) <= lsb / 2 + 1e-9 * np.abs(cells)), name
        expect = np.sign(cells - zero) * np.floor(np.abs(cells - zero) / lsb + 0.5)
        assert np.array_equal(log.raw[:, k], expect.astype(np.int32)), name


def test_read_log_without_model_takes_every_numeric_column(demo):
    log = linegate.read_log(demo / "train-synthetic.csv", sheet=demo / "channels.toml")
    ref = pd.read_csv(demo / "train-synthetic.csv")
    numeric = [c for c in ref.columns if c not in ("unit_id", "timestamp", "verdict")]
    assert log.channels == numeric and len(log) == len(ref)


def test_broken_log_error_names_file_line_column(demo, tmp_path):
    text = (demo / "holdout-synthetic.csv").read_text().splitlines()
    header = text[0].split(",")
    row = text[5].split(",")
    col = header.index("vibration_mg")
    row[col] = "4O.2"  # a letter O for a zero
    text[5] = ",".join(row)
    bad = tmp_path / "bad.csv"
    bad.write_text("\n".join(text) + "\n")
    with pytest.raises(linegate.LogError) as e:
        linegate.read_log(bad, model=demo / "model.json")
    assert e.value.file == str(bad) and e.value.line == 6 and e.value.column == "vibration_mg"
    assert "4O.2" in str(e.value)
    # The CLI names the same place (its message is the exception's).
    with pytest.raises(linegate.LogError) as e2:
        linegate.replay(bad, model=demo / "model.json", blob=demo / "model.lgmb")
    assert (e2.value.line, e2.value.column) == (6, "vibration_mg")


def test_unknown_option_is_a_usage_error(demo):
    with pytest.raises(linegate.UsageError):
        linegate.read_log(demo / "holdout-synthetic.csv", no_such_option=3)
