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


def test_readme_missing_prediction_and_drift_examples_run_as_printed(daemon: Any, client: mixd.Client) -> None:
    """The four blocks of "Missing fields, prediction and drift" run as one
    session; what they print equals the client's own answers."""
    text = (HERE.parent / "README.md").read_text()
    section = text.split("## Missing fields, prediction and drift", 1)[1].split("\n## ", 1)[0]
    blocks = re.findall(r"```python\n(.*?)```", section, flags=re.S)
    assert len(blocks) == 4, blocks
    env = dict(os.environ, MIXD_ADDR=daemon.address)
    res = subprocess.run(
        [sys.executable, "-c", "\n".join(blocks)], cwd=REPO, env=env, capture_output=True, text=True, timeout=300
    )
    assert res.returncode == 0, res.stderr
    lines = res.stdout.strip().splitlines()
    assert len(lines) == 3, res.stdout
    versions = client.list_versions("pumps-drift")
    old, new = versions[-2], versions[-1]
    r = np.array([[41.0, 37.0, 0.0]])
    seen = np.array([[True, True, False]])
    ld = client.score(old, r, observed=seen).log_density
    assert lines[0] == str(ld), (lines[0], ld)
    p = client.predict(old, r, seen, std=True, draws=5, seed=1)
    assert lines[1] == f"{p.means[0, 2]} {p.std[0, 2]} {p.draws[0, :, 2]}"
    d = client.compare_models(old, new, seed=1)
    assert lines[2] == f"{d.kl_forward} {d.kl_forward_standard_error} {[(t.component, t.other_component) for t in d.matches]}"
