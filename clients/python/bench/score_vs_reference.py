#!/usr/bin/env python3
"""Benchmark (not a test): the daemon's Score through the Python client
against scikit-learn's GaussianMixture computing the same log-densities in
process, at N = 1 000 000 rows, K = 8 components, D = 8 features, full
covariances.

Usage (from the repository root):

    pip install ./clients/python scikit-learn
    go build -o /tmp/mixd ./cmd/mixd
    python3 clients/python/bench/score_vs_reference.py --daemon-binary /tmp/mixd
    # or, against a daemon already running:
    python3 clients/python/bench/score_vs_reference.py --address 127.0.0.1:7313

The model is a seeded random mixture imported into the daemon as a model
document; the rows are drawn around its means. Both sides are timed on the
same rows in the same run, each `--repeats` times, and the best and median
are reported as rows per second. The client's time includes converting the
rows to bytes, the transfer over loopback (chunked, streamed), the daemon's
computation and the conversion back to numpy. scikit-learn's time is its
Gaussian mixture evaluating the per-row log-densities on the same
parameters set directly (no fit). Results of the two are compared as a
sanity check.

The scikit-learn side is the test suite's reference function
``gaussian_mixture_log_density`` in ``clients/python/tests/sklearn_reference.py``:
this script adds that directory to ``sys.path`` to import it, so that
scikit-learn's own names live only in the tests' reference code.

Numbers on a shared machine measure the other tenants too: report them with
the machine's load (printed at the start).
"""

from __future__ import annotations

import argparse
import os
import re
import statistics
import subprocess
import sys
import tempfile
import time
from typing import Callable, List, Optional, Tuple

import numpy as np

# The reference computation is shared with the test suite: import it from
# clients/python/tests (see the module docstring).
sys.path.insert(0, os.path.join(os.path.dirname(os.path.abspath(__file__)), os.pardir, "tests"))


def parameters(k: int, d: int, seed: int) -> Tuple[np.ndarray, np.ndarray, np.ndarray]:
    rng = np.random.default_rng(seed)
    w = rng.uniform(0.5, 1.5, size=k)
    w /= w.sum()
    w[-1] = 1.0 - w[:-1].sum()
    mu = rng.normal(scale=4.0, size=(k, d))
    covs = []
    for _ in range(k):
        a = rng.normal(size=(d, d))
        m = a @ a.T / d + np.diag(rng.uniform(0.3, 1.5, size=d))
        covs.append((m + m.T) / 2)
    return w, mu, np.stack(covs)


def document(name: str, w: np.ndarray, mu: np.ndarray, cov: np.ndarray) -> dict:
    return {
        "format": "mixd-model",
        "format_version": 1,
        "name": name,
        "dimension": int(mu.shape[1]),
        "family": "gaussian",
        "covariance_structure": "full",
        "components": [
            {"weight": float(w[i]), "mean": mu[i].tolist(), "covariance": cov[i].tolist()} for i in range(len(w))
        ],
    }


def timed(fn: Callable[[], object], repeats: int) -> Tuple[List[float], object]:
    times, out = [], None
    for _ in range(repeats):
        t0 = time.perf_counter()
        out = fn()
        times.append(time.perf_counter() - t0)
    return times, out


def start_daemon(binary: str) -> Tuple[subprocess.Popen, str, str]:
    work = tempfile.mkdtemp(prefix="mixd-bench-")
    log = os.path.join(work, "mixd.log")
    with open(log, "wb") as f:
        proc = subprocess.Popen(
            [binary, "serve", "--listen", "127.0.0.1:0", "--data-dir", os.path.join(work, "data")],
            stdout=subprocess.DEVNULL, stderr=f, stdin=subprocess.DEVNULL,
        )
    deadline = time.monotonic() + 60
    while time.monotonic() < deadline:
        m = re.search(r"mixd: listening on (\S+)", open(log, errors="replace").read())
        if m:
            return proc, m.group(1), work
        if proc.poll() is not None:
            break
        time.sleep(0.05)
    proc.kill()
    sys.exit(f"daemon did not start:\n{open(log, errors='replace').read()}")


def main(argv: Optional[List[str]] = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    g = ap.add_mutually_exclusive_group(required=True)
    g.add_argument("--address", help="address of a running daemon")
    g.add_argument("--daemon-binary", help="start this mixd binary on 127.0.0.1 port 0")
    ap.add_argument("--rows", type=int, default=1_000_000)
    ap.add_argument("--components", type=int, default=8)
    ap.add_argument("--dimension", type=int, default=8)
    ap.add_argument("--repeats", type=int, default=5)
    ap.add_argument("--seed", type=int, default=20261201)
    args = ap.parse_args(argv)

    import mixd
    import sklearn
    from sklearn_reference import gaussian_mixture_log_density

    n, k, d = args.rows, args.components, args.dimension
    w, mu, cov = parameters(k, d, args.seed)
    rng = np.random.default_rng(args.seed + 1)
    x = mu[rng.integers(0, k, size=n)] + rng.normal(scale=1.5, size=(n, d))

    try:
        from threadpoolctl import threadpool_info

        blas = ", ".join(f"{i.get('internal_api')} {i.get('version')} ({i.get('num_threads')} threads)" for i in threadpool_info())
    except Exception:  # pragma: no cover - informational only
        blas = "unknown"
    print(f"N={n} K={k} D={d} full covariances; repeats={args.repeats}")
    print(f"machine: {os.cpu_count()} CPUs, load average {os.getloadavg()[0]:.2f} {os.getloadavg()[1]:.2f} {os.getloadavg()[2]:.2f} (shared machine)")
    print(f"python {sys.version.split()[0]}, numpy {np.__version__}, scikit-learn {sklearn.__version__}, BLAS: {blas}")

    proc = None
    address = args.address
    if args.daemon_binary:
        proc, address, _ = start_daemon(args.daemon_binary)
    try:
        with mixd.Client(address) as c:
            m = c.import_model(document("bench-score", w, mu, cov))
            c.score(m, x[:1000])  # warm the model cache and the connection
            t_client, res = timed(lambda: c.score(m, x), args.repeats)
        ld_client = res.log_density  # type: ignore[attr-defined]

        # Reference: scikit-learn's Gaussian mixture with the same parameters
        # set directly, no fit (tests/sklearn_reference.py).
        reference = gaussian_mixture_log_density(w, mu, cov)
        reference(x[:1000])
        t_ref, ld_ref = timed(lambda: reference(x), args.repeats)
    finally:
        if proc is not None:
            proc.terminate()
            proc.wait(timeout=20)

    diff = float(np.max(np.abs(np.asarray(ld_ref) - ld_client) / np.maximum(1.0, np.abs(ld_client))))

    def rate(ts: List[float]) -> Tuple[float, float]:
        return n / min(ts), n / statistics.median(ts)

    cb, cm = rate(t_client)
    rb, rm = rate(t_ref)
    print(f"max relative difference of the log-densities: {diff:.2e}")
    print(f"{'':32s} {'best rows/s':>14s} {'median rows/s':>14s}")
    print(f"{'mixd daemon via Python client':32s} {cb:14,.0f} {cm:14,.0f}")
    print(f"{'scikit-learn in process':32s} {rb:14,.0f} {rm:14,.0f}")
    print(f"ratio daemon / scikit-learn: best {cb / rb:.2f}, median {cm / rm:.2f}")
    return 0 if diff < 1e-9 else 1


if __name__ == "__main__":
    sys.exit(main())
