"""Benchmark: the audit of a generated 20,000,000 x 16 Parquet log (40 files of 500,000
units) on Dask with 1, 2 and 4 worker processes against the single-process command line,
whole processes as a user runs them, best of 3 interleaved in one run; peak memory of the
command, of each Dask worker and of the driver; and whether each Dask run gives the
command's figures for the log exactly.

    cargo build --release -p host-trainer && pip install ./host-trainer/python "dask[distributed]"
    python3 host-trainer/python/bench/dask_audit.py --dir /tmp/lg-bench   # ~2 GiB of Parquet

The data are synthetic (`linegate generate`); the model is trained on 200,000 other units
of the same log.
"""

import argparse
import json
import os
import resource
import subprocess
import sys
import time


def driver(d: str, workers: int) -> None:
    from dask.distributed import Client, LocalCluster
    import linegate.dask as lgdask

    t0 = time.perf_counter()
    with LocalCluster(n_workers=workers, threads_per_worker=1, processes=True, dashboard_address=None) as cluster:
        with Client(cluster) as client:
            t1 = time.perf_counter()
            a = lgdask.audit(os.path.join(d, "fleet"), os.path.join(d, "m.json"), os.path.join(d, "m.lgmb"),
                             name="validation-1", client=client, no_project=True)
            t2 = time.perf_counter()
            peaks = client.run(lambda: resource.getrusage(resource.RUSAGE_SELF).ru_maxrss)
    print(json.dumps({"audit_s": t2 - t1, "startup_s": t1 - t0, "peak_kib": sorted(peaks.values()),
                      "driver_peak_kib": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss, "set": a.set}))


def make(d: str, linegate: str, rows: int, files: int) -> None:
    import pyarrow as pa
    import pyarrow.parquet as pq

    if os.path.exists(os.path.join(d, "m.lgmb")):
        return
    os.makedirs(os.path.join(d, "fleet"), exist_ok=True)
    train = 200_000
    subprocess.run([linegate, "--no-project", "-q", "generate", "--rows", str(rows + train), "--channels", "16",
                    "--seed", "7", "-o", "all.parquet", "--force"], cwd=d, check=True)
    f = pq.ParquetFile(os.path.join(d, "all.parquet"))
    per = rows // files
    buf, k, done = None, 0, False
    for g in range(f.metadata.num_row_groups):
        t = f.read_row_group(g)
        buf = t if buf is None else pa.concat_tables([buf, t])
        if not done and buf.num_rows >= train:
            pq.write_table(buf.slice(0, train), os.path.join(d, "train.parquet"))
            buf, done = buf.slice(train), True
        while done and buf.num_rows >= per and k < files:
            pq.write_table(buf.slice(0, per), os.path.join(d, "fleet", f"part-{k:03d}.parquet"), row_group_size=100_000)
            buf, k = buf.slice(per), k + 1
    os.remove(os.path.join(d, "all.parquet"))
    subprocess.run([linegate, "--no-project", "-q", "train", "train.parquet", "--sheet", "all.toml", "-o", "m.json"],
                   cwd=d, check=True)
    subprocess.run([linegate, "--no-project", "-q", "pack", "--model", "m.json", "-o", "m.lgmb", "--override-audit"],
                   cwd=d, check=True)


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--dir", required=True)
    ap.add_argument("--linegate", default=os.path.join(os.path.dirname(__file__), "../../../target/release/linegate"))
    ap.add_argument("--rows", type=int, default=20_000_000)
    ap.add_argument("--files", type=int, default=40)
    ap.add_argument("--reps", type=int, default=3)
    a = ap.parse_args()
    d, lg = os.path.abspath(a.dir), os.path.abspath(a.linegate)
    os.makedirs(d, exist_ok=True)
    make(d, lg, a.rows, a.files)
    runs = {}
    for _ in range(a.reps):
        t = time.perf_counter()
        p = subprocess.run(["/usr/bin/time", "-f", "%M", lg, "--no-project", "-q", "audit", "--model", "m.json",
                            "--holdout", "train.parquet", "--validate", os.path.join(d, "fleet", "*.parquet"),
                            "--out-dir", "rep-cli", "--force"], cwd=d, capture_output=True, text=True)
        runs.setdefault("cli", []).append((time.perf_counter() - t, int(p.stderr.strip().splitlines()[-1])))
        for w in (1, 2, 4):
            t = time.perf_counter()
            p = subprocess.run([sys.executable, __file__, "--driver", d, str(w)], capture_output=True, text=True)
            if p.returncode != 0:
                sys.exit(p.stderr)
            runs.setdefault(w, []).append((time.perf_counter() - t, json.loads(p.stdout.strip().splitlines()[-1])))
    ref = next(s for s in json.load(open(os.path.join(d, "rep-cli", "audit.json")))["sets"] if s["name"] == "validation-1")
    cli = min(r[0] for r in runs["cli"])
    print(f"{a.rows:,} x 16 in {a.files} files, best of {a.reps}")
    print(f"CLI single process: {cli:.2f} s, peak {max(r[1] for r in runs['cli']) / 1024:.0f} MiB")
    for w in (1, 2, 4):
        e, out = min(runs[w], key=lambda r: r[0])
        same = all(r[1]["set"] == ref for r in runs[w])
        print(f"Dask, {w} worker(s): {e:.2f} s whole process (audit call {out['audit_s']:.2f} s), ratio to the CLI "
              f"{e / cli:.2f}; peak per worker {max(out['peak_kib']) / 1024:.0f} MiB, driver "
              f"{out['driver_peak_kib'] / 1024:.0f} MiB; the command's figures exactly: {same}")


if __name__ == "__main__":
    if len(sys.argv) == 4 and sys.argv[1] == "--driver":
        driver(sys.argv[2], int(sys.argv[3]))
    else:
        main()
