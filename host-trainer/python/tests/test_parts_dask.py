"""Replay, audit and drift by parts on Dask (a local cluster of worker processes) against
the single-process command line on the same files: the reference for every merge is the
`linegate` binary's own single pass over the same log (run as a subprocess), and numpy
recounts the outcomes from its lines.

Logs: an invented log from `linegate generate`, cut into Parquet files at random rows
(pyarrow writes them), with readings pushed out of range so FAULTs occur; and
scikit-learn's bundled breast-cancer set (load_breast_cancer), cut the same way.
"""

from __future__ import annotations

import json
import random
from pathlib import Path
from typing import List

import numpy as np
import pytest

from conftest import skipped

pa = pytest.importorskip("pyarrow")
pq = pytest.importorskip("pyarrow.parquet")

try:
    import dask  # noqa: F401
    from dask.distributed import Client, LocalCluster
except ImportError:  # pragma: no cover - said loudly
    Client = None

import linegate
import linegate.dask as lgdask
from linegate import parts


@pytest.fixture(scope="module")
def client():
    if Client is None:
        skipped("dask.distributed is not installed (pip install 'dask[distributed]')")
    # Worker processes, as a cluster's: parts cross process boundaries as bytes.
    with LocalCluster(n_workers=3, threads_per_worker=1, processes=True, dashboard_address=None) as cluster:
        with Client(cluster) as c:
            yield c


def cut(table, rows: List[int], folder: Path) -> List[str]:
    """`table` written as Parquet files cut before each row in `rows`."""
    folder.mkdir(parents=True, exist_ok=True)
    edges = [0] + sorted(set(r for r in rows if 0 < r < table.num_rows)) + [table.num_rows]
    files = []
    for k, (a, b) in enumerate(zip(edges, edges[1:])):
        f = folder / f"part-{k:03d}.parquet"
        pq.write_table(table.slice(a, b - a), f)
        files.append(str(f))
    return files


@pytest.fixture(scope="module")
def release(tmp_path_factory, cli):
    """An invented log (generate), its model and blob, and a table of new units with some
    readings beyond the channels' ranges (FAULTs)."""
    d = tmp_path_factory.mktemp("dask")
    cli(["--no-project", "-q", "generate", "--rows", "6000", "--channels", "6", "--seed", "3", "-o", "all.parquet"], d)
    t = pq.read_table(d / "all.parquet")
    pq.write_table(t.slice(0, 2000), d / "train.parquet")
    cli(["--no-project", "-q", "train", "train.parquet", "--sheet", "all.toml", "--c", "1", "--folds", "0",
         "-o", "m.json"], d)
    cli(["--no-project", "-q", "audit", "--model", "m.json", "--out-dir", "rep"], d)
    cli(["--no-project", "-q", "pack", "--model", "m.json", "-o", "m.lgmb"], d)
    field = t.slice(2000).to_pandas()
    rng = np.random.default_rng(5)
    bad = rng.choice(len(field), 25, replace=False)
    field.loc[field.index[bad], "ch02"] = 1e6  # far beyond the sheet's range: FAULT ch2
    return d, pa.Table.from_pandas(field, preserve_index=False)


def cli_audit(cli, d: Path, pattern: str, out: str, extra=()) -> dict:
    cli(["--no-project", "-q", "audit", "--model", "m.json", "--validate", pattern, "--out-dir", out, *extra], d,
        check=False)
    return json.loads((d / out / "audit.json").read_text())


def listed(report: dict, key: str, log: str) -> list:
    return [u for u in report[key] if u["set"] == log]


@pytest.mark.parametrize("seed", range(4))
def test_any_partitioning_gives_the_single_process_audit_and_replay(client, release, cli, seed):
    d, table = release
    rng = random.Random(seed)
    rows = [rng.randrange(1, table.num_rows) for _ in range(rng.randrange(0, 9))]
    folder = d / f"cut-{seed}"
    files = cut(table, rows, folder)
    report = cli_audit(cli, d, f"{folder}/*.parquet", f"rep-{seed}")
    got = lgdask.audit(folder, d / "m.json", d / "m.lgmb", name="validation-1", client=client)
    assert got.set == report["sets"][1], f"partitioning {rows}"
    assert got.flipped == listed(report, "flips", "validation-1")
    assert got.wrong == listed(report, "wrong", "validation-1")
    theirs = listed(report, "tightest", "validation-1")
    assert got.tightest[: len(theirs)] == theirs
    assert got.faults == 25
    # The same merge in this process, in reversed file order: audit parts commute.
    job, files2, _, _ = parts.prepare("audit", folder, d / "m.json", d / "m.lgmb", no_project=True)
    assert files2 == files
    ps = [job.audit_part(f, k, "validation-1") for k, f in enumerate(files)]
    rev = parts.tree_reduce(ps[::-1], parts.merge_audit)
    assert parts.LogAudit.of(rev, len(files)).data == got.data
    # Replay: the device's lines over the whole log, numbered across the files.
    lines = cli(["--no-project", "replay", f"cut-{seed}/*.parquet", "--model", "m.json", "--blob", "m.lgmb",
                 "--form", "device"], d).stdout.splitlines()
    rep = lgdask.replay(folder, d / "m.json", d / "m.lgmb", client=client)
    assert rep.lines == lines
    # Outside count (numpy over the lines): the FAULT lines are the units pushed out.
    words = np.array([ln.split()[1] for ln in lines[1:]])
    assert (rep.go, rep.nogo, rep.faults) == ((words == "GO").sum(), (words == "NO-GO").sum(), 25)


def test_declared_noise_counts_alike(client, release, cli):
    d, table = release
    files = cut(table, [700, 2100], d / "noise")
    report = cli_audit(cli, d, f"{d}/noise/*.parquet", "rep-noise", ["--noise", "ch01=20", "--noise", "ch03=12.5"])
    got = lgdask.audit(d / "noise", d / "m.json", d / "m.lgmb", name="validation-1", client=client,
                       noise={"ch01": 20.0, "ch03": 12.5})
    assert got.set == report["sets"][1]
    assert got.data["at_risk_count"] > 0
    assert got.set["noise_unsafe"] == report["sets"][1]["noise_unsafe"]
    # The units declared noise could move, as the audit's tolerance lists them for this log.
    assert got.data["units_at_risk"] == listed(report["tolerance"], "units_at_risk", "validation-1")


def test_another_release_and_a_tampered_blob_are_refused(client, release, cli):
    d, _ = release
    bad = bytearray((d / "m.lgmb").read_bytes())
    bad[len(bad) // 2] ^= 1
    (d / "bad.lgmb").write_bytes(bytes(bad))
    with pytest.raises(linegate.ReleaseError):
        lgdask.audit(d / "noise", d / "m.json", d / "bad.lgmb", name="validation-1", client=client)
    job, files, _, _ = parts.prepare("audit", d / "noise", d / "m.json", d / "m.lgmb", no_project=True)
    with pytest.raises(linegate.ReleaseError):
        job.__class__(job.model, bytes(bad)).audit_part(files[0], 0, "validation-1")
    a, b = job.audit_part(files[0], 0, "validation-1"), job.audit_part(files[1], 1, "holdout")
    c = job.audit_part(files[2], 2, "validation-1")
    b1 = job.audit_part(files[1], 1, "validation-1")
    # Parts of two different logs (names), a part merged twice, or a file left out: refused.
    with pytest.raises(linegate.ReleaseError):
        parts.merge_audit(a, b)
    with pytest.raises(linegate.ReleaseError):
        parts.merge_audit(parts.merge_audit(a, b1), b1)
    with pytest.raises(linegate.ReleaseError):
        parts.LogAudit.of(parts.merge_audit(a, c), 3)
    with pytest.raises(linegate.ReleaseError):  # the last file's part left out
        parts.LogAudit.of(parts.merge_audit(a, b1), 3)
    with pytest.raises(linegate.ReleaseError):
        parts.LogAudit.of(a[: len(a) // 2], 3)
    # A drift start is not a file's part, and a file's part is not a start.
    start = job.drift_start(str(d / "rep"))
    d0, d1 = job.drift_part(files[0], 0, start), job.drift_part(files[1], 1, start)
    with pytest.raises(linegate.ReleaseError):
        parts.merge_drift(start, d1)
    with pytest.raises(linegate.ReleaseError):
        job.drift_part(files[1], 1, d0)
    # A flag the parts cannot apply is refused, not ignored.
    with pytest.raises(linegate.UsageError):
        parts.prepare("audit", d / "noise", d / "m.json", d / "m.lgmb", log_args=["--max-false-go", "0.5"],
                      no_project=True)
    # Replay parts merge only as neighbours of one release.
    r0, r1, r2 = (job.replay_part(f, k) for k, f in enumerate(files))
    with pytest.raises(linegate.ReleaseError):
        parts.merge_replay(r0, r2)
    with pytest.raises(linegate.ReleaseError):
        parts.merge_replay(r1, r0)
    with pytest.raises(linegate.ReleaseError):
        parts.ReplayLines.of(parts.merge_replay(r0, r1), "", 3)
    with pytest.raises(TypeError):
        parts.prepare("audit", d / "noise", d / "m.json", d / "m.lgmb", log_args="--skip-bad-rows")


def test_a_broken_file_names_file_line_and_column(client, release, cli, tmp_path):
    d, table = release
    files = cut(table.slice(0, 100), [50], tmp_path / "broken")
    t = pq.read_table(files[1]).to_pandas()
    t["ch04"] = t["ch04"].map(repr)  # numbers as text, which the reader takes, then one that is not
    t.loc[t.index[7], "ch04"] = "n/a"
    pq.write_table(pa.Table.from_pandas(t, preserve_index=False), files[1])
    with pytest.raises(linegate.LogError) as e:
        lgdask.audit(tmp_path / "broken", d / "m.json", d / "m.lgmb", name="validation-1", client=client)
    assert e.value.file == files[1]
    assert e.value.column == "ch04"
    assert e.value.line == 7  # a Parquet file's row, from 0


@pytest.mark.parametrize("seed", range(3))
def test_drift_on_dask_equals_the_command_line(client, release, cli, seed):
    d, table = release
    rng = random.Random(100 + seed)
    rows = [rng.randrange(1, table.num_rows) for _ in range(rng.randrange(1, 9))]
    folder = d / f"field-{seed}"
    files = cut(table, rows, folder)
    p = cli(["--no-project", "-q", "drift", f"{folder}/*.parquet", "--audit", "rep", "--model", "m.json",
             "--blob", "m.lgmb", "--json"], d, check=False)
    assert p.returncode in (0, 1), p.stderr
    theirs = json.loads(p.stdout)
    got = lgdask.drift(folder, d / "m.json", d / "m.lgmb", d / "rep", client=client)
    assert got.data == theirs, f"partitioning {rows}"
    assert got.in_control == (p.returncode == 0)
    # The FAULTs pushed out of range are counted on the channel the device names.
    assert got.data["faults"] == 25


def test_breast_cancer_cut_at_random_audits_and_replays_alike(client, tmp_path, cli):
    datasets = pytest.importorskip("sklearn.datasets")
    x, y = datasets.load_breast_cancer(return_X_y=True)
    names = [f"f{k:02d}" for k in range(x.shape[1])]
    cols = {n: x[:, k] for k, n in enumerate(names)}
    cols["label"] = np.where(y == 1, "GO", "NO-GO")
    t = pa.table(cols)
    order = np.random.default_rng(0).permutation(len(y))
    pq.write_table(t.take(order[:340]), tmp_path / "train.parquet")
    rest = t.take(order[340:])
    # The averaged perceptron trains in a moment on the debug build; the release need not
    # pass its gates to be audited and replayed alike.
    cli(["--no-project", "-q", "train", "train.parquet", "--trainer", "averaged", "-o", "m.json"], tmp_path)
    cli(["--no-project", "-q", "pack", "--model", "m.json", "-o", "m.lgmb", "--override-audit"], tmp_path)
    for seed in range(3):
        rng = random.Random(seed)
        files = cut(rest, [rng.randrange(1, rest.num_rows) for _ in range(5)], tmp_path / f"bc-{seed}")
        report = cli_audit(cli, tmp_path, f"{tmp_path}/bc-{seed}/*.parquet", f"rep-{seed}")
        got = lgdask.audit(tmp_path / f"bc-{seed}", tmp_path / "m.json", tmp_path / "m.lgmb",
                           name="validation-1", client=client)
        assert got.set == report["sets"][1]
        lines = cli(["--no-project", "replay", f"bc-{seed}/*.parquet", "--model", "m.json", "--blob", "m.lgmb",
                     "--form", "device"], tmp_path).stdout.splitlines()
        assert lgdask.replay(tmp_path / f"bc-{seed}", tmp_path / "m.json", tmp_path / "m.lgmb",
                             client=client).lines == lines
        # Outside recount (numpy): false GO = NO-GO units (label 0) the device passed.
        words = np.array([ln.split()[1] for ln in lines[1:]])
        labels = np.concatenate([pq.read_table(f).column("label").to_numpy(zero_copy_only=False) for f in files])
        assert got.false_go == int(((words == "GO") & (labels == "NO-GO")).sum())
        assert got.false_nogo == int(((words != "GO") & (words != "RECHECK") & (labels == "GO")).sum())


def test_files_that_are_not_one_log_are_refused_as_the_command_refuses_them(client, release, cli, tmp_path):
    d, table = release
    files = cut(table.slice(0, 600), [300], tmp_path / "dup")
    copy = tmp_path / "dup" / "part-009.parquet"
    copy.write_bytes(Path(files[0]).read_bytes())  # the same bytes under another name
    p = cli(["--no-project", "-q", "audit", "--model", "m.json", "--validate", f"{tmp_path}/dup/*.parquet"], d,
            check=False)
    assert p.returncode == 2 and "same bytes" in p.stderr
    with pytest.raises(linegate.ReleaseError, match="twice"):
        lgdask.audit(tmp_path / "dup", d / "m.json", d / "m.lgmb", name="validation-1", client=client)
    # A file with another channel column: the command line's own message, file named.
    t = pq.read_table(files[1]).to_pandas().rename(columns={"ch05": "ch5x"})
    (tmp_path / "mixed").mkdir()
    pq.write_table(pa.Table.from_pandas(t, preserve_index=False), tmp_path / "mixed" / "b.parquet")
    pq.write_table(pq.read_table(files[0]), tmp_path / "mixed" / "a.parquet")
    with pytest.raises(linegate.LogError) as e:
        lgdask.audit(tmp_path / "mixed", d / "m.json", d / "m.lgmb", name="validation-1", client=client)
    assert e.value.file.endswith("b.parquet")


def test_settings_come_from_the_project_file_and_flags_as_the_command_line_takes_them(client, release, cli, tmp_path):
    d, table = release
    folder = tmp_path / "proj" / "logs"
    files = cut(table.slice(0, 1500), [400, 900], folder)
    # A bad row, skipped under --skip-bad-rows by both and counted.
    t = pq.read_table(files[1]).to_pandas()
    t["ch04"] = t["ch04"].map(repr)
    t.loc[t.index[3], "ch04"] = "n/a"
    pq.write_table(pa.Table.from_pandas(t, preserve_index=False), files[1])
    proj = tmp_path / "proj"
    (proj / "linegate.toml").write_text("[gates]\nnoise = { ch01 = 20.0 }\n")
    for f in ("m.json", "m.lgmb", "all.toml", "train.parquet"):
        (proj / f).write_bytes((d / f).read_bytes())
    cli(["-q", "audit", "--model", "m.json", "--validate", f"{folder}/*.parquet", "--out-dir", "rep",
             "--skip-bad-rows"], proj, check=False)
    report = json.loads((proj / "rep" / "audit.json").read_text())
    got = lgdask.audit(folder, proj / "m.json", proj / "m.lgmb", name="validation-1", client=client,
                       project=proj / "linegate.toml", log_args=["--skip-bad-rows"])
    assert got.set == report["sets"][1]
    assert got.set["skipped_rows"] == 1 and got.set["noise_unsafe"] > 0
    lines = cli(["-q", "replay", f"{folder}/*.parquet", "--model", "m.json", "--blob", "m.lgmb", "--form",
                 "device", "--skip-bad-rows"], proj).stdout.splitlines()
    with pytest.warns(UserWarning, match="skipped 1 rows"):
        rep = lgdask.replay(folder, proj / "m.json", proj / "m.lgmb", client=client, no_project=True,
                            log_args=["--skip-bad-rows"])
    assert rep.lines == lines and rep.skipped == 1


def test_a_signed_blob_and_a_glob_across_folders(client, release, cli, tmp_path):
    d, table = release
    cli(["key", "new", "-o", str(tmp_path / "k")], d)
    key, pub = tmp_path / "k.key", tmp_path / "k.pub"
    cli(["--no-project", "-q", "pack", "--model", "m.json", "-o", str(tmp_path / "s.lgmb"), "--sign", str(key),
         "--override-audit"], d)
    for name, (a, n) in {"day": (0, 300), "day-1": (300, 500)}.items():
        (tmp_path / name).mkdir()
        pq.write_table(table.slice(a, n), tmp_path / name / "x.parquet")
    pattern = f"{tmp_path}/day*/x.parquet"
    lines = cli(["--no-project", "replay", pattern, "--model", "m.json", "--blob", str(tmp_path / "s.lgmb"),
                 "--form", "device", "--public-key", str(pub)], d).stdout.splitlines()
    rep = lgdask.replay(pattern, d / "m.json", tmp_path / "s.lgmb", public_key=pub, client=client, no_project=True)
    assert rep.lines == lines
    cli(["key", "new", "-o", str(tmp_path / "other")], d)
    with pytest.raises(linegate.ReleaseError):
        lgdask.replay(pattern, d / "m.json", tmp_path / "s.lgmb", public_key=tmp_path / "other.pub", client=client)


def test_field_logs_without_a_label_replay_and_drift_as_the_command_line_does(client, release, cli, tmp_path):
    d, table = release
    folder = tmp_path / "unlabelled"
    cut(table.slice(0, 1200).drop(["label"]), [500], folder)
    lines = cli(["--no-project", "replay", f"{folder}/*.parquet", "--model", "m.json", "--blob", "m.lgmb",
                 "--form", "device"], d).stdout.splitlines()
    assert lgdask.replay(folder, d / "m.json", d / "m.lgmb", client=client, no_project=True).lines == lines
    p = cli(["--no-project", "-q", "drift", f"{folder}/*.parquet", "--audit", "rep", "--model", "m.json",
             "--blob", "m.lgmb", "--json", "--alpha", "0.05"], d, check=False)
    got = lgdask.drift(folder, d / "m.json", d / "m.lgmb", d / "rep", client=client, no_project=True,
                       log_args=["--alpha", "0.05"])
    assert got.data == json.loads(p.stdout)
