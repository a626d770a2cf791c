"""The README's Python example runs exactly as printed, from the repository
root, against the test daemon (reached through $MIXD_ADDR)."""

from __future__ import annotations

import os
import re
import subprocess
import sys
from typing import Any

import numpy as np

import mixd

from conftest import HERE, REPO


def test_readme_example_runs_as_printed(daemon: Any, client: mixd.Client) -> None:
    text = (HERE.parent / "README.md").read_text()
    blocks = re.findall(r"```python\n(.*?)```", text, flags=re.S)
    assert blocks, "README.md has no python block"
    example = blocks[0]
    assert len(example.strip().splitlines()) == 5, example
    env = dict(os.environ, MIXD_ADDR=daemon.address)
    res = subprocess.run([sys.executable, "-c", example], cwd=REPO, env=env, capture_output=True, text=True, timeout=300)
    assert res.returncode == 0, res.stderr
    # It printed three percentiles and three component labels.
    numbers = re.findall(r"-?\d+(?:\.\d+)?(?:e[-+]?\d+)?", res.stdout)
    assert len(numbers) == 6, res.stdout
    m = client.get_model("pumps-py")
    assert m.components == 4 and m.report is not None and m.report.training_rows == 3000
    x = np.loadtxt(REPO / "testdata" / "pumps" / "stations.csv", delimiter=",", skiprows=1)
    want = client.classify(m, x[:3]).component
    assert [int(v) for v in numbers[3:]] == want.tolist()
