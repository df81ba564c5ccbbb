"""The README's Spark example (`mapInPandas` over a log's files) runs as written, on Spark's
own local mode in a separate process, and its audit equals the `linegate` binary's
single-process audit of the same files (the outside reference: the command line's
audit.json)."""

from __future__ import annotations

import json
import re
import subprocess
import sys
from pathlib import Path

import pytest

from conftest import ROOT, skipped

pq = pytest.importorskip("pyarrow.parquet")


def test_the_spark_example_gives_the_command_lines_audit(tmp_path, cli):
    try:
        import pyspark  # noqa: F401
    except ImportError:
        skipped("pyspark is not installed (pip install pyspark; it needs a Java runtime)")
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    m = re.search(r"<!-- Spark example: [^>]*-->\n```python\n(.*?)```", text, re.S)
    assert m, "README.md: the Spark example block is missing"
    d = tmp_path
    cli(["--no-project", "-q", "generate", "--rows", "5000", "--channels", "5", "--seed", "8", "-o", "all.parquet"], d)
    t = pq.read_table(d / "all.parquet")
    pq.write_table(t.slice(0, 1500), d / "train.parquet")
    (d / "fleet").mkdir()
    for k, a in enumerate((1500, 2300, 3900)):
        pq.write_table(t.slice(a, {1500: 800, 2300: 1600, 3900: 1100}[a]), d / "fleet" / f"day-{k}.parquet")
    cli(["--no-project", "-q", "train", "train.parquet", "--sheet", "all.toml", "--c", "1", "--folds", "0",
         "-o", "model.json"], d)
    cli(["--no-project", "-q", "pack", "--model", "model.json", "-o", "model.lgmb", "--override-audit"], d)
    cli(["--no-project", "-q", "audit", "--model", "model.json", "--validate", f"{d}/fleet/*.parquet",
         "--out-dir", "rep"], d, check=False)
    ref = next(s for s in json.loads((d / "rep" / "audit.json").read_text())["sets"] if s["name"] == "validation-1")
    script = m.group(1) + "\nimport json as _j\nopen('got.json', 'w').write(_j.dumps(audit.set))\nspark.stop()\n"
    (d / "example.py").write_text(script)
    p = subprocess.run([sys.executable, "example.py"], cwd=d, capture_output=True, text=True, timeout=600)
    if p.returncode != 0 and "JAVA" in (p.stderr or "").upper() and "java" not in str(Path(sys.executable)):
        skipped(f"Spark could not start (no Java runtime?): {p.stderr.strip().splitlines()[-1:]}")
    assert p.returncode == 0, p.stderr[-3000:]
    got = json.loads((d / "got.json").read_text())
    assert got == ref
    assert p.stdout.split()[:2] == [str(ref["units"]), str(ref["false_go"])]
