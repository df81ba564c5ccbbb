"""The README's Python example runs as written (in a fresh folder) and its assertion,
the DataFrame's lines equal to `replay --form device`'s, holds."""

from __future__ import annotations

import os
import re

from conftest import ROOT


def test_readme_example_runs(tmp_path, cli):
    text = (ROOT / "README.md").read_text(encoding="utf-8")
    m = re.search(r"<!-- README example: [^>]*-->\n```python\n(.*?)```", text, re.S)
    assert m, "README.md: the Python example block is missing"
    here = os.getcwd()
    os.chdir(tmp_path)
    try:
        exec(compile(m.group(1), "README.md", "exec"), {})
    finally:
        os.chdir(here)
    # The same lines from the binary in another process.
    p = cli(["-q", "replay", "--model", "linegate-demo/model.json", "--blob", "linegate-demo/model.lgmb",
             "linegate-demo/holdout-synthetic.csv", "--form", "device"], tmp_path)
    import linegate
    import pandas as pd

    r = linegate.Release.load(tmp_path / "linegate-demo/model.json", tmp_path / "linegate-demo/model.lgmb")
    d = r.classify(pd.read_csv(tmp_path / "linegate-demo/holdout-synthetic.csv"))
    assert p.stdout.splitlines() == [r.model_line, *d.lines()]
