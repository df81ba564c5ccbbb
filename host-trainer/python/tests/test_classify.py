"""Release.classify against the command line's `linegate replay --form device` (run as
a separate process, the outside reference here): the demo's invented station and
scikit-learn's bundled breast-cancer set, FAULT rows included, signed blobs checked."""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest

import linegate
from conftest import read_toml, replay_device, skipped


def both(release, frame):
    d = release.classify(frame)
    return [release.model_line] + d.lines(), d


@pytest.mark.parametrize("log", ["holdout-synthetic.csv", "train-synthetic.csv", "drift-synthetic.csv"])
def test_demo_frame_equals_replay(demo, cli, log):
    r = linegate.Release.load(demo / "model.json", demo / "model.lgmb")
    mine, d = both(r, pd.read_csv(demo / log))
    assert mine == replay_device(cli, demo, "model.json", "model.lgmb", log)
    assert len(d) == len(mine) - 1 and set(d.verdict) <= {"GO", "NO-GO", "RECHECK"}


def test_frame_columns_found_by_name_any_order_any_case(demo, cli):
    r = linegate.Release.load(demo / "model.json", demo / "model.lgmb")
    df = pd.read_csv(demo / "holdout-synthetic.csv")
    shuffled = df[list(reversed(df.columns))].rename(columns=str.upper)
    shuffled["operator"] = "kim"  # another column: ignored
    assert r.classify(shuffled).lines() == r.classify(df).lines()
    # A 2-D array in channel order gives the same decisions.
    arr = df[r.channels].to_numpy(dtype=float)
    assert r.classify(arr).lines() == r.classify(df).lines()


def out_of_range(frame, release, demo):
    """The frame with rows pushed outside their channel's range (the sheet's), as
    invented FAULT units: row 3 above channel 0's max, row 10 below channel 2's min."""
    sheet = read_toml(demo / "channels.toml")
    by = {c["name"]: c for c in sheet["channel"]}
    f = frame.copy()
    c0, c2 = release.channels[0], release.channels[2]
    f.loc[3, c0] = by[c0]["max"] + 10 * abs(by[c0]["max"] - by[c0]["min"])
    f.loc[10, c2] = by[c2]["min"] - 10 * abs(by[c2]["max"] - by[c2]["min"])
    return f


def test_fault_rows_equal_replay(demo, cli, tmp_path):
    r = linegate.Release.load(demo / "model.json", demo / "model.lgmb")
    f = out_of_range(pd.read_csv(demo / "holdout-synthetic.csv"), r, demo)
    f.to_csv(tmp_path / "faults.csv", index=False)
    mine, d = both(r, f)
    ref = replay_device(cli, tmp_path, demo / "model.json", demo / "model.lgmb", "faults.csv")
    assert mine == ref
    assert d.verdict[3] == "FAULT" and d.fault[3] == "ch0" and d.fault_channel[3] == r.channels[0]
    assert d.verdict[10] == "FAULT" and d.fault[10] == "ch2"
    assert ref[4] == "3 FAULT ch0" and ref[11] == "10 FAULT ch2"
    # The raw counts of the same log, read by the package's reader, classify the same.
    # (read_log refuses out-of-range readings as audit does, so the in-range log here.)
    log = linegate.read_log(demo / "holdout-synthetic.csv", model=demo / "model.json")
    assert r.classify_raw(log.raw).lines() == r.classify(pd.read_csv(demo / "holdout-synthetic.csv")).lines()


def test_nan_cell_names_row_and_column(demo):
    r = linegate.Release.load(demo / "model.json", demo / "model.lgmb")
    f = pd.read_csv(demo / "holdout-synthetic.csv")
    f.loc[7, r.channels[1]] = np.nan
    with pytest.raises(linegate.LogError) as e:
        r.classify(f)
    assert (e.value.line, e.value.column, e.value.file) == (7, r.channels[1], "<DataFrame>")
    f.loc[7, r.channels[1]] = np.inf
    with pytest.raises(linegate.LogError):
        r.classify(f)
    with pytest.raises(linegate.LogError) as e:
        r.classify(f.drop(columns=[r.channels[4]]))
    assert e.value.column == r.columns[4]


def test_signed_blob_verified_tampered_and_wrong_key_refused(demo, cli, tmp_path):
    cli(["-q", "key", "new", "-o", "owner"], tmp_path)
    cli(["-q", "key", "new", "-o", "other"], tmp_path)
    pub, sec = tmp_path / "owner.pub", tmp_path / "owner.key"
    cli(
        ["-q", "pack", "--model", demo / "model.json", "--train", demo / "train-synthetic.csv",
         "--holdout", demo / "holdout-synthetic.csv", "-o", "signed.lgmb", "--sign", sec, "--override-audit"],
        tmp_path,
    )
    r = linegate.Release.load(demo / "model.json", tmp_path / "signed.lgmb", public_key=pub)
    assert r.key_id is not None and f"key {r.key_id}" in r.model_line
    mine, _ = both(r, pd.read_csv(demo / "holdout-synthetic.csv"))
    ref = replay_device(cli, tmp_path, demo / "model.json", "signed.lgmb",
                        demo / "holdout-synthetic.csv", "--public-key", pub)
    assert mine == ref
    with pytest.raises(linegate.ReleaseError):
        linegate.Release.load(demo / "model.json", tmp_path / "signed.lgmb", public_key=tmp_path / "other.pub")
    with pytest.raises(linegate.ReleaseError):  # unsigned blob, key required
        linegate.Release.load(demo / "model.json", demo / "model.lgmb", public_key=pub)
    data = bytearray((tmp_path / "signed.lgmb").read_bytes())
    data[20] ^= 0x01
    (tmp_path / "tampered.lgmb").write_bytes(bytes(data))
    with pytest.raises(linegate.ReleaseError):
        linegate.Release.load(demo / "model.json", tmp_path / "tampered.lgmb", public_key=pub)
    # The command line refuses both too (exit 1).
    p = cli(["-q", "replay", "--model", demo / "model.json", "--blob", "signed.lgmb",
             demo / "holdout-synthetic.csv", "--public-key", "other.pub"], tmp_path, check=False)
    assert p.returncode == 1


def test_blob_of_another_model_refused(demo, cli, tmp_path):
    cli(["-q", "train", demo / "train-synthetic.csv", "--sheet", demo / "channels.toml",
         "--trainer", "averaged", "-o", "other.json"], tmp_path)
    with pytest.raises(linegate.ReleaseError, match="not a blob of the float model"):
        linegate.Release.load(tmp_path / "other.json", demo / "model.lgmb")


def test_breast_cancer_trained_by_cli_equals_replay(cli, tmp_path):
    try:
        from sklearn.datasets import load_breast_cancer
    except ImportError:
        skipped("scikit-learn missing: breast-cancer check (pip install scikit-learn)")
    # scikit-learn's bundled breast-cancer set (target 1 is benign → GO).
    bc = load_breast_cancer(as_frame=True)
    df = bc.data.copy()
    df.insert(0, "label", np.where(bc.target == 1, "GO", "NO-GO"))
    df.insert(0, "unit_id", [f"u{i:04d}" for i in range(len(df))])
    df.to_csv(tmp_path / "bc.csv", index=False)
    # The averaged perceptron: quick in a debug build; any trainer serves this check.
    cli(["-q", "train", "bc.csv", "-o", "bc.json", "--trainer", "averaged"], tmp_path)
    cli(["-q", "pack", "--model", "bc.json", "--train", "bc.csv", "-o", "bc.lgmb", "--override-audit"], tmp_path)
    r = linegate.Release.load(tmp_path / "bc.json", tmp_path / "bc.lgmb")
    assert r.channels == list(bc.feature_names)
    mine, d = both(r, df)
    assert mine == replay_device(cli, tmp_path, "bc.json", "bc.lgmb", "bc.csv")
    # FAULT units: two readings far outside their observed range.
    f = df.copy()
    f.loc[5, "mean area"] = f["mean area"].max() * 50
    f.loc[9, "worst texture"] = -1000.0
    f.to_csv(tmp_path / "bc-fault.csv", index=False)
    mine, d = both(r, f)
    ref = replay_device(cli, tmp_path, "bc.json", "bc.lgmb", "bc-fault.csv")
    assert mine == ref
    assert list(d.verdict[[5, 9]]) == ["FAULT", "FAULT"]
    # Against the labels (scikit-learn's targets): the device agrees on most units.
    decided = d.verdict != "FAULT"
    agree = (d.verdict[decided] == "GO") == (bc.target.to_numpy()[decided] == 1)
    assert agree.mean() > 0.9


def test_wine_classes_model_equals_replay(cli, tmp_path):
    try:
        from sklearn.datasets import load_wine
    except ImportError:
        skipped("scikit-learn missing: the class-model check (pip install scikit-learn)")
    # scikit-learn's bundled wine set, its three cultivars as three classes (one GO).
    wine = load_wine(as_frame=True)
    names = ["good", "second", "third"]
    df = wine.data.copy()
    df.columns = [f"c{k}" for k in range(df.shape[1])]
    df["label"] = [names[t] for t in wine.target]
    df.to_csv(tmp_path / "wine.csv", index=False)
    classes = [a for n in names for a in ("--class", f"{n}={n}")]
    cli(["-q", "train", "wine.csv", *classes, "--go-class", "good", "--no-operating-point", "--c", "1",
         "-o", "wine.json"], tmp_path)
    cli(["-q", "pack", "--model", "wine.json", "--train", "wine.csv", "-o", "wine.lgmb", "--override-audit"],
        tmp_path)
    r = linegate.Release.load(tmp_path / "wine.json", tmp_path / "wine.lgmb")
    assert r.classes == names
    f = df.copy()
    f.loc[4, "c0"] = 1e6  # out of range: FAULT
    f.to_csv(tmp_path / "wine-fault.csv", index=False)
    mine, d = both(r, f)
    assert mine == replay_device(cli, tmp_path, "wine.json", "wine.lgmb", "wine-fault.csv")
    assert d.verdict[4] == "FAULT" and d.class_name[4] == ""
    decided = d.verdict != "FAULT"
    # Each decided line ends with the leading class's name, as the arrays say.
    assert all(line.endswith(" " + c) for line, c, ok in zip(d.lines(), d.class_name, decided) if ok)
    assert "class" in d.to_frame().columns
