"""The commands run in process: their typed results against the JSON the same command
writes when the `linegate` binary runs it (the outside reference: a separate process)."""

from __future__ import annotations

import hashlib
import json

import pandas as pd
import pytest

import linegate


def test_argv_from_keywords():
    from linegate._argv import flags

    assert flags({"max_false_go": 0.01, "sweep": True, "force": False, "noise": ["a=1", "b=2"], "class_": "x"}) == [
        "--max-false-go", "0.01", "--sweep", "--noise", "a=1", "--noise", "b=2", "--class", "x"]


def test_audit_result_equals_cli_json(demo, cli, tmp_path):
    args = dict(model=demo / "model.json", train=demo / "train-synthetic.csv", holdout=demo / "holdout-synthetic.csv")
    a = linegate.audit(out_dir=tmp_path / "py", **args)
    p = cli(["-q", "audit", "--model", args["model"], "--train", args["train"], "--holdout", args["holdout"],
             "--out-dir", "cli"], tmp_path, check=False)
    ref = json.loads((tmp_path / "cli" / "audit.json").read_text())
    assert p.returncode == (0 if ref["passed"] else 1)
    assert a.passed == ref["passed"] and a.reasons == ref["reasons"]
    assert [(s.name, s.units, s.false_go, s.false_nogo, s.recheck, s.flips, s.min_margin_lsb) for s in a.logs] == [
        (s["name"], s["units"], s["false_go"], s["false_nogo"], s["recheck"], s["flips"], s["min_margin_lsb"])
        for s in ref["sets"]]
    assert a.blob_id == ref["blob_id"] and a.model_id == ref["model_id"]


def test_failed_audit_returns_result_or_raises(demo, tmp_path):
    # A RECHECK band of 0 with declared noise: some units can swap within it, a gate fails.
    args = dict(model=demo / "model.json", train=demo / "train-synthetic.csv",
                holdout=demo / "holdout-synthetic.csv", noise=["vibration_mg=40"])
    a = linegate.audit(out_dir=tmp_path / "a", **args)
    assert a.passed is False and a.reasons
    with pytest.raises(linegate.CheckFailed) as e:
        linegate.audit(out_dir=tmp_path / "b", check=True, **args)
    assert isinstance(e.value.result, linegate.AuditResult) and e.value.result.passed is False
    with pytest.raises(linegate.CheckFailed):  # pack refuses the failing audit
        linegate.pack(output=tmp_path / "x.lgmb", **args)
    assert not (tmp_path / "x.lgmb").exists()


def test_train_pack_and_classify_equal_cli(demo, cli, tmp_path):
    # C fixed (a float keyword) keeps the debug build quick; the rest are train's defaults.
    t = linegate.train(demo / "train-synthetic.csv", sheet=demo / "channels.toml", output=tmp_path / "py.json",
                       holdout=demo / "holdout-synthetic.csv", c=1.0)
    cli(["-q", "train", demo / "train-synthetic.csv", "--sheet", demo / "channels.toml",
         "--holdout", demo / "holdout-synthetic.csv", "--c", "1.0", "-o", "cli.json"], tmp_path)
    ref = json.loads((tmp_path / "cli.json").read_text())
    assert t.model_id == ref["model_id"] and t.data["weights"] == ref["weights"]
    pk = linegate.pack(model=t.model, train=demo / "train-synthetic.csv", holdout=demo / "holdout-synthetic.csv",
                       output=tmp_path / "py.lgmb", override_audit=True)
    cli(["-q", "pack", "--model", "cli.json", "--train", demo / "train-synthetic.csv",
         "--holdout", demo / "holdout-synthetic.csv", "-o", "cli.lgmb", "--override-audit"], tmp_path)
    blob = (tmp_path / "cli.lgmb").read_bytes()
    # hashlib is the outside reference for the digest; the blobs are byte-identical.
    assert pk.sha256 == hashlib.sha256(blob).hexdigest() and pk.size == len(blob)
    assert pk.model_id == t.model_id and pk.blob_id is not None
    rp = linegate.replay(demo / "holdout-synthetic.csv", model=t.model, blob=pk.blob)
    r = linegate.Release.load(t.model, pk.blob)
    assert rp.lines == [r.model_line] + r.classify(pd.read_csv(demo / "holdout-synthetic.csv")).lines()


def test_compare_result_equals_cli_json(demo, cli, tmp_path):
    cli(["-q", "train", demo / "train-synthetic.csv", "--sheet", demo / "channels.toml",
         "--trainer", "averaged", "-o", "b.json"], tmp_path)
    args = dict(model=demo / "model.json", blob=demo / "model.lgmb", against=tmp_path / "b.json")
    c = linegate.compare(demo / "holdout-synthetic.csv", json_out=tmp_path / "py.json", **args)
    p = cli(["-q", "compare", demo / "holdout-synthetic.csv", "--model", args["model"], "--blob", args["blob"],
             "--against", args["against"], "--json", "cli.json"], tmp_path, check=False)
    ref = json.loads((tmp_path / "cli.json").read_text())
    assert p.returncode == (0 if ref["gate"]["passed"] else 1)
    assert c.passed == ref["gate"]["passed"] and c.units == ref["units"]
    assert c.transitions == ref["transitions"] and c.changes == ref["changes"]
    assert c.nogo_to_go == ref["gate"]["nogo_to_go"]


def test_drift_and_check_results(demo, cli):
    d = linegate.drift(demo / "drift-synthetic.csv", audit=demo / "audit.json", model=demo / "model.json",
                       blob=demo / "model.lgmb")
    p = cli(["-q", "drift", "drift-synthetic.csv", "--audit", "audit.json", "--model", "model.json",
             "--blob", "model.lgmb", "--json"], demo, check=False)
    ref = json.loads(p.stdout)
    assert p.returncode == 1 and d.passed is False and d.alarms == ref["alarms"]
    with pytest.raises(linegate.CheckFailed):
        linegate.drift(demo / "drift-synthetic.csv", audit=demo / "audit.json", model=demo / "model.json",
                       blob=demo / "model.lgmb", check=True)
    c = linegate.check(demo / "train-synthetic.csv", sheet=demo / "channels.toml")
    ref = json.loads(cli(["-q", "check", "train-synthetic.csv", "--sheet", "channels.toml", "--json"], demo).stdout)
    assert c.separable == ref["separable"] and c.margin == ref["margin"] and c.data == ref


def test_run_help_and_usage_errors(capfd):
    assert linegate.run(["--version"]) == 0
    with pytest.raises(linegate.UsageError, match="unexpected argument"):
        linegate.run(["audit", "--no-such-flag"])
