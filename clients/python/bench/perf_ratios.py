#!/usr/bin/env python3
"""Benchmark (not a test): every speed and memory ratio of the performance
targets, measured side by side in one run on this machine.

Usage, from the repository root (Go toolchain on PATH; the script builds
`mixd` and the Go driver `clients/python/bench/perfdrive` itself):

    python3 -m venv /tmp/perfvenv
    /tmp/perfvenv/bin/pip install -r clients/python/requirements-test.txt ./clients/python
    env -u OPENBLAS_CORETYPE -u OPENBLAS_L2_SIZE \
        /tmp/perfvenv/bin/python clients/python/bench/perf_ratios.py

Options: --rounds R (interleaved rounds per comparison, default 3),
--only em,eval,client,latency,growth,memory,cache (a subset), --quick (fewer
iterations and rounds, for a smoke run), --keep (keep the temporary folder),
--memory-limit 300MiB (run the memory section's daemon, and so its fitter
processes, with that GOMEMLIMIT).

Sections (N rows, K components, D features, full covariances):

  em       EM time per iteration, mixd in process (fitters/em through the Go
           driver) vs scikit-learn's GaussianMixture, same data, same start,
           same ridge (1e-6 on the diagonal), same iteration count;
           N = 100 000, K = 8, D = 2, 8, 32. Per-iteration time is the
           difference between fits of M2 and M1 iterations divided by
           M2 − M1, so set-up and final steps cancel.
  eval     rows per second of log-densities and of posteriors in process:
           mixture.Model.LogDensity / Posteriors vs scikit-learn's
           GaussianMixture evaluating the same; same N, K, D.
  client   1 000 000 rows, D = 8, K = 8 scored through the Python client over
           loopback by a mixd daemon vs scikit-learn computing the same
           log-densities in this process.
  latency  single-row Classify over gRPC: median vs a health check on the
           same connection (one caller alternating), and the 99th percentile
           with 32 concurrent callers (Go load generator, bounded in time);
           then the same 32 callers with health checks (the transport's own
           floor under that load) and both paced to fixed total rates.
  growth   EM time per iteration at N = 10^4 … 10^6 (D = 8, K = 8) and the
           least-squares slope of log(time) on log(N) (1 = linear).
  memory   the daemon's peak resident memory (VmHWM; its fitter child
           processes too) during a fit of 1 000 000 × 32 rows, K = 8, three
           iterations, vs 3 × the data's size + 200 MiB.
  cache    live heap per cached model (K = 8, D = 32) in the daemon's
           serving code vs the bytes of its parameters and Cholesky factors.

Each reference time is the faster of two runs, one with the BLAS library's
default thread count and one with a single thread (on a busy machine a
spinning BLAS thread pool can be far slower than one thread). Each
comparison runs R rounds, mixd then the reference, alternately, and
reports the median over rounds of each side and of the per-round ratio; the
table at the end lists every ratio with its target. The machine is shared:
the load average is printed at the start and the end, and ratios, not
absolute times, are what to compare between runs. The scikit-learn side is
in clients/python/tests/perf_reference.py (its own names stay in the
tests' reference code).
"""

from __future__ import annotations

import argparse
import json
import math
import os
import shutil
import statistics
import subprocess
import sys
import tempfile
import threading
import time
from typing import Any, Callable, Dict, List, Optional, Sequence, Tuple

import numpy as np

HERE = os.path.dirname(os.path.abspath(__file__))
sys.path.insert(0, HERE)
from score_vs_reference import document, start_daemon  # noqa: E402

SEED = 20261201


# --------------------------------------------------------------- data


def random_mixture(k: int, d: int, seed: int) -> Tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Weights, means (spread 4) and random well-conditioned covariances."""
    rng = np.random.default_rng(seed)
    w = rng.uniform(0.5, 1.5, size=k)
    w /= w.sum()
    mu = rng.normal(scale=4.0, size=(k, d))
    covs = []
    for _ in range(k):
        a = rng.normal(size=(d, d))
        m = a @ a.T / d + np.diag(rng.uniform(0.3, 1.5, size=d))
        covs.append((m + m.T) / 2)
    return w, mu, np.stack(covs)


def draw(w: np.ndarray, mu: np.ndarray, cov: np.ndarray, n: int, seed: int) -> np.ndarray:
    """n rows drawn from the mixture."""
    rng = np.random.default_rng(seed)
    k, d = mu.shape
    comp = rng.choice(k, size=n, p=w / w.sum())
    z = rng.standard_normal(size=(n, d))
    x = np.empty((n, d))
    for c in range(k):
        idx = np.flatnonzero(comp == c)
        x[idx] = mu[c] + z[idx] @ np.linalg.cholesky(cov[c]).T
    return x


def start_of(x: np.ndarray, k: int, seed: int) -> Tuple[np.ndarray, np.ndarray, np.ndarray]:
    """A fixed EM start: equal weights, k distinct random rows as means, the
    covariance of the whole data for every component."""
    rng = np.random.default_rng(seed)
    mu = x[rng.choice(x.shape[0], size=k, replace=False)].copy()
    c = np.cov(x, rowvar=False, bias=True).reshape(x.shape[1], x.shape[1])
    return np.full(k, 1.0 / k), mu, np.stack([c] * k)


def write_rows(path: str, x: np.ndarray) -> None:
    np.ascontiguousarray(x, dtype="<f8").tofile(path)


def write_doc(path: str, name: str, w: np.ndarray, mu: np.ndarray, cov: np.ndarray) -> None:
    w = np.asarray(w, dtype=float).copy()
    w[-1] = 1.0 - w[:-1].sum()
    with open(path, "w") as f:
        json.dump(document(name, w, mu, cov), f)


# ---------------------------------------------------------- REFERENCE
# scikit-learn's side lives in clients/python/tests/perf_reference.py, so
# that its own names stay in the tests' reference code.

sys.path.insert(0, os.path.join(HERE, os.pardir, "tests"))
from perf_reference import gaussian_mixture_em, gaussian_mixture_evaluators  # noqa: E402


def reference_mean_loglik(x: np.ndarray, w: Any, mu: Any, cov: Any) -> float:
    """Mean log-likelihood of x under a mixture, computed by the reference."""
    return float(np.mean(gaussian_mixture_evaluators(np.asarray(w), np.asarray(mu), np.asarray(cov))[0](x)))


# ------------------------------------------------------------- harness


class Bench:
    def __init__(self, args: argparse.Namespace, work: str) -> None:
        self.args = args
        self.work = work
        self.rows: List[Tuple[str, str, str, bool]] = []  # name, target, measured, met
        self.notes: List[str] = []
        self.driver = os.path.join(work, "perfdrive")
        self.mixd = os.path.join(work, "mixd")

    def build(self) -> None:
        for out, pkg in ((self.driver, "./clients/python/bench/perfdrive"), (self.mixd, "./cmd/mixd")):
            subprocess.run(["go", "build", "-o", out, pkg], check=True)

    def go(self, *args: str) -> Dict[str, Any]:
        p = subprocess.run([self.driver, *args], check=True, stdout=subprocess.PIPE)
        return json.loads(p.stdout)

    def record(self, name: str, target: str, measured: str, met: Optional[bool]) -> None:
        """One row of the final table; met None marks a context row with no
        target of its own."""
        self.rows.append((name, target, measured, met))
        verdict = "(context)" if met is None else "met" if met else "MISSED"
        print(f"  -> {name}: {measured} (target {target}) {verdict}", flush=True)

    def path(self, name: str) -> str:
        return os.path.join(self.work, name)


def med(v: Sequence[float]) -> float:
    return float(statistics.median(v))


def timed(fn: Callable[[], Any]) -> Tuple[float, Any]:
    t0 = time.perf_counter()
    out = fn()
    return time.perf_counter() - t0, out


def ref_timed(fn: Callable[[], Any]) -> Tuple[float, Any]:
    """Times the reference twice, with its BLAS's default thread count and
    with one thread, and keeps the faster: on a busy machine a BLAS that
    spins on two threads can be several times slower than on one, and the
    comparison should be with the reference at its best."""
    from threadpoolctl import threadpool_limits

    t_default, out = timed(fn)
    with threadpool_limits(limits=1):
        t_one, _ = timed(fn)
    return min(t_default, t_one), out


# ------------------------------------------------------------ sections


def section_em(b: Bench) -> None:
    n, k = 100_000, 8
    m1, m2 = (2, 6) if b.args.quick else (2, 10)
    print(f"\n[em] N={n} K={k} full; per-iteration time = (T({m2}) - T({m1})) / {m2 - m1}; {b.args.rounds} rounds")
    for d in (2, 8, 32):
        w, mu, cov = random_mixture(k, d, SEED + d)
        x = draw(w, mu, cov, n, SEED + 100 + d)
        start = start_of(x, k, SEED + 200 + d)
        data, doc = b.path(f"em{d}.f64"), b.path(f"em{d}-start.json")
        write_rows(data, x)
        write_doc(doc, "em-start", *start)
        ours, ref, ratios = [], [], []
        final = None
        for _ in range(b.args.rounds):
            r = b.go("em", "-data", data, "-rows", str(n), "-cols", str(d), "-start", doc, "-iters", f"{m1},{m2}")
            t_ours = (r["seconds"][1] - r["seconds"][0]) / (m2 - m1)
            final = r
            t1, _ = ref_timed(lambda: gaussian_mixture_em(x, start, m1, 1e-6))
            t2, ref_final = ref_timed(lambda: gaussian_mixture_em(x, start, m2, 1e-6))
            t_ref = (t2 - t1) / (m2 - m1)
            ours.append(t_ours)
            ref.append(t_ref)
            ratios.append(t_ours / t_ref)
            print(f"  D={d:2d} mixd {1e3 * t_ours:8.1f} ms/iter   scikit-learn {1e3 * t_ref:8.1f} ms/iter   ratio {t_ours / t_ref:.2f}", flush=True)
        assert final is not None
        ll_ours = reference_mean_loglik(x, final["weights"], final["means"], final["covariances"])
        ll_ref = reference_mean_loglik(x, *ref_final)
        print(f"  D={d:2d} check: mean log-likelihood after {m2} iterations mixd {ll_ours:.9f}, scikit-learn {ll_ref:.9f}")
        if abs(ll_ours - ll_ref) > 1e-6 * max(1.0, abs(ll_ref)):
            b.notes.append(f"em D={d}: the two fits differ after {m2} iterations ({ll_ours} vs {ll_ref})")
        target = 1.0 if d == 32 else 0.5
        r = med(ratios)
        b.record(
            f"EM time/iteration mixd ÷ scikit-learn, D={d}", f"≤ {target}",
            f"{r:.2f} ({1e3 * med(ours):.1f} vs {1e3 * med(ref):.1f} ms)", r <= target,
        )


def section_eval(b: Bench) -> None:
    n, k = 100_000, 8
    print(f"\n[eval] in process, N={n} K={k} full; {b.args.rounds} rounds of 3 calls (median)")
    for d in (2, 8, 32):
        w, mu, cov = random_mixture(k, d, SEED + 10 + d)
        x = draw(w, mu, cov, n, SEED + 110 + d)
        data, doc = b.path(f"eval{d}.f64"), b.path(f"eval{d}.json")
        write_rows(data, x)
        write_doc(doc, "eval", w, mu, cov)
        w[-1] = 1.0 - w[:-1].sum()
        evaluators = dict(zip(("ld", "post"), gaussian_mixture_evaluators(w, mu, cov)))
        evaluators["ld"](x[:1000])
        res: Dict[str, Tuple[List[float], List[float], List[float]]] = {"ld": ([], [], []), "post": ([], [], [])}
        r = None
        for _ in range(b.args.rounds):
            r = b.go("eval", "-data", data, "-rows", str(n), "-cols", str(d), "-model", doc, "-repeats", "3")
            for what, key in (("ld", "log_density_seconds"), ("post", "posterior_seconds")):
                t_ref = med([ref_timed(lambda: evaluators[what](x))[0] for _ in range(3)])
                ours, ref, ratios = res[what]
                ours.append(n / r[key])
                ref.append(n / t_ref)
                ratios.append(ours[-1] / ref[-1])
            print(
                f"  D={d:2d} log-density mixd {res['ld'][0][-1] / 1e6:6.2f} M rows/s, scikit-learn {res['ld'][1][-1] / 1e6:6.2f};"
                f" posteriors mixd {res['post'][0][-1] / 1e6:6.2f}, scikit-learn {res['post'][1][-1] / 1e6:6.2f}",
                flush=True,
            )
        assert r is not None
        h = len(r["head"])
        dl = np.max(np.abs(np.asarray(r["head"]) - evaluators["ld"](x[:h])))
        dp = np.max(np.abs(np.asarray(r["head_posteriors"]).reshape(h, k) - evaluators["post"](x[:h])))
        print(f"  D={d:2d} check: first {h} rows, max |Δ log-density| {dl:.1e}, max |Δ posterior| {dp:.1e}")
        if dl > 1e-8 or dp > 1e-8:
            b.notes.append(f"eval D={d}: results differ from the reference ({dl}, {dp})")
        target = 1.0 if d == 32 else 2.0
        for what, label in (("ld", "log-density"), ("post", "posterior")):
            ours, ref, ratios = res[what]
            rr = med(ratios)
            b.record(
                f"{label} rows/s mixd ÷ scikit-learn, D={d}", f"≥ {target}",
                f"{rr:.2f} ({med(ours) / 1e6:.2f} vs {med(ref) / 1e6:.2f} M rows/s)", rr >= target,
            )


class Daemon:
    """A mixd daemon on 127.0.0.1 port 0 with a fresh data folder."""

    def __init__(self, b: Bench) -> None:
        self.proc, self.address, self.work = start_daemon(b.mixd)

    def close(self) -> None:
        self.proc.terminate()
        try:
            self.proc.wait(timeout=30)
        except subprocess.TimeoutExpired:
            self.proc.kill()
            self.proc.wait()
        shutil.rmtree(self.work, ignore_errors=True)


def section_client(b: Bench, dmn: Daemon) -> None:
    import mixd

    n, k, d = 1_000_000, 8, 8
    print(f"\n[client] {n} rows, D={d}, K={k}: Python client over loopback vs scikit-learn in this process; {b.args.rounds} rounds")
    w, mu, cov = random_mixture(k, d, SEED + 20)
    x = draw(w, mu, cov, n, SEED + 120)
    w[-1] = 1.0 - w[:-1].sum()
    ref_ld = gaussian_mixture_evaluators(w, mu, cov)[0]
    ours, ref, ratios = [], [], []
    with mixd.Client(dmn.address) as c:
        m = c.import_model(document("bench-client", w, mu, cov))
        c.score(m, x[:1000])
        ref_ld(x[:1000])
        res = None
        for _ in range(b.args.rounds):
            t_c, res = timed(lambda: c.score(m, x))
            t_r, ld_ref = ref_timed(lambda: ref_ld(x))
            ours.append(n / t_c)
            ref.append(n / t_r)
            ratios.append(ours[-1] / ref[-1])
            print(f"  client {ours[-1] / 1e6:6.2f} M rows/s, scikit-learn {ref[-1] / 1e6:6.2f} M rows/s, ratio {ratios[-1]:.2f}", flush=True)
    diff = float(np.max(np.abs(np.asarray(res.log_density) - ld_ref)))  # type: ignore[union-attr]
    print(f"  check: max |Δ log-density| {diff:.1e}")
    if diff > 1e-8:
        b.notes.append(f"client: log-densities differ from the reference by {diff}")
    rr = med(ratios)
    b.record(
        "Score via Python client ÷ scikit-learn in process, 1e6×8", "≥ 0.5",
        f"{rr:.2f} ({med(ours) / 1e6:.2f} vs {med(ref) / 1e6:.2f} M rows/s)", rr >= 0.5,
    )


def section_latency(b: Bench, dmn: Daemon) -> None:
    import mixd

    k, d = 8, 8
    secs = "3s" if b.args.quick else "8s"
    print(f"\n[latency] single-row Classify, D={d}, K={k}: {secs} serial (alternating with health checks), {secs} with 32 callers")
    w, mu, cov = random_mixture(k, d, SEED + 30)
    x = draw(w, mu, cov, 1024, SEED + 130)
    data = b.path("latency.f64")
    write_rows(data, x)
    w[-1] = 1.0 - w[:-1].sum()
    with mixd.Client(dmn.address) as c:
        c.import_model(document("bench-latency", w, mu, cov))
    tick = os.sysconf("SC_CLK_TCK")

    def cpu_of(pid: int) -> float:
        with open(f"/proc/{pid}/stat") as f:
            st = f.read()
        v = st[st.rindex(")") + 2 :].split()
        return (int(v[11]) + int(v[12])) / tick  # utime + stime

    args = ["latency", "-address", dmn.address, "-model", "bench-latency", "-data", data, "-cols", str(d), "-callers", "32"]
    r = b.go(*args, "-serial", secs, "-concurrent", "0s")
    cores = os.cpu_count() or 1

    def closed(flag: str, key: str) -> Tuple[Dict[str, Any], float, float]:
        """One closed-loop phase (32 callers back to back) with the CPU each
        call cost the daemon and the load generator."""
        srv0, gen0 = cpu_of(dmn.proc.pid), os.times()
        out = b.go(*args, "-serial", "0s", "-concurrent", "0s", flag, secs)
        srv1, gen1 = cpu_of(dmn.proc.pid), os.times()
        ph = out[key] if key else {k[len("concurrent_"):]: v for k, v in out.items() if k.startswith("concurrent_")}
        calls = 1000 + ph["calls"]  # the warm-up (500 Classify, 500 health checks) and the phase
        srv_us = 1e6 * (srv1 - srv0) / calls
        gen_us = 1e6 * ((gen1.children_user + gen1.children_system) - (gen0.children_user + gen0.children_system)) / calls
        return ph, srv_us, gen_us

    cl, cl_srv, cl_gen = closed("-concurrent", "")
    hl, hl_srv, hl_gen = closed("-health-concurrent", "health_concurrent")
    rates = "1000,4000"
    pr = b.go(*args, "-serial", "0s", "-concurrent", "0s", "-rates", rates, "-paced", "3s" if b.args.quick else "5s")["paced"]
    print(
        f"  serial ({r['serial_pairs']} pairs): Classify median {r['classify_median_ms']:.3f} ms (p99 {r['classify_p99_serial_ms']:.3f}),"
        f" health median {r['health_median_ms']:.3f} ms (p99 {r['health_p99_serial_ms']:.3f})"
    )
    for name, ph, srv_us, gen_us in (("Classify", cl, cl_srv, cl_gen), ("health checks", hl, hl_srv, hl_gen)):
        print(
            f"  32 callers, {name} back to back: {ph['calls']} calls in {ph['seconds']:.1f} s ({ph['calls_per_second']:.0f}/s),"
            f" median {ph['median_ms']:.3f} ms, p99 {ph['p99_ms']:.3f} ms, max {ph['max_ms']:.1f} ms, errors {ph['errors']}"
        )
        print(
            f"    CPU per call: daemon {srv_us:.0f} µs, load generator {gen_us:.0f} µs; with both on {cores} cores at most"
            f" {1e6 * cores / (srv_us + gen_us):.0f} calls/s, so 32 callers wait at least"
            f" {32 * (srv_us + gen_us) / cores / 1e3:.2f} ms per call on average (Little's law)"
        )
    for p in pr:
        c, h = p["classify"], p["health"]
        print(
            f"  32 callers paced to {p['offered_per_second']:.0f} calls/s in all: Classify median {c['median_ms']:.3f} ms, p99 {c['p99_ms']:.3f} ms;"
            f" health median {h['median_ms']:.3f} ms, p99 {h['p99_ms']:.3f} ms (latency from when a call was due; the generator"
            f" itself sent calls up to {max(c['send_late_p99_ms'], h['send_late_p99_ms']):.2f} ms late at the 99th percentile)"
        )
    ratio = r["classify_median_ms"] / r["health_median_ms"]
    b.record("Classify median ÷ health-check median, 1 row", "≤ 1.5",
             f"{ratio:.2f} ({1e3 * r['classify_median_ms']:.0f} vs {1e3 * r['health_median_ms']:.0f} µs)", ratio <= 1.5)
    p99 = cl["p99_ms"]
    b.record("Classify p99, 32 concurrent callers", "< 2 ms", f"{p99:.2f} ms", p99 < 2 and cl["errors"] == 0)
    # Not a target of its own: what the transport alone reaches under the
    # same load on this machine, the floor for the row above.
    b.record("  the same with health checks (transport floor)", "none", f"{hl['p99_ms']:.2f} ms; Classify ÷ health {p99 / hl['p99_ms']:.2f}", None)


def section_growth(b: Bench) -> None:
    k, d = 8, 8
    sizes = [10_000, 30_000, 100_000, 300_000, 1_000_000]
    m1, m2 = (2, 5) if b.args.quick else (2, 8)
    print(f"\n[growth] EM time per iteration vs N, D={d}, K={k} (mixd in process); (T({m2}) - T({m1})) / {m2 - m1}")
    w, mu, cov = random_mixture(k, d, SEED + 40)
    x = draw(w, mu, cov, sizes[-1], SEED + 140)
    data = b.path("growth.f64")
    write_rows(data, x)
    per: Dict[int, List[float]] = {s: [] for s in sizes}
    for _ in range(max(1, b.args.rounds - 1)):
        for s in sizes:
            doc = b.path(f"growth-{s}.json")
            if not os.path.exists(doc):
                write_doc(doc, "growth-start", *start_of(x[:s], k, SEED + 240))
            r = b.go("em", "-data", data, "-rows", str(s), "-cols", str(d), "-start", doc, "-iters", f"{m1},{m2}")
            per[s].append((r["seconds"][1] - r["seconds"][0]) / (m2 - m1))
    t = np.array([med(per[s]) for s in sizes])
    slope, _ = np.polyfit(np.log(sizes), np.log(t), 1)
    for s, ts in zip(sizes, t):
        print(f"  N={s:8d}: {1e3 * ts:8.2f} ms/iter, {1e9 * ts / s:6.1f} ns per row")
    b.record("EM time/iteration growth in N (log-log slope, 1e4→1e6)", "≤ 1.10 (linear)", f"{slope:.3f}", slope <= 1.10)


def vm_hwm(pid: int) -> int:
    """Peak resident set of a process in bytes (0 once it is gone)."""
    try:
        with open(f"/proc/{pid}/status") as f:
            for line in f:
                if line.startswith("VmHWM:"):
                    return int(line.split()[1]) * 1024
    except OSError:
        pass
    return 0


def children(pid: int) -> List[int]:
    out = []
    for e in os.listdir("/proc"):
        if not e.isdigit():
            continue
        try:
            with open(f"/proc/{e}/stat") as f:
                st = f.read()
            if int(st[st.rindex(")") + 2 :].split()[1]) == pid:
                out.append(int(e))
        except (OSError, ValueError):
            pass
    return out


def section_memory(b: Bench) -> None:
    import mixd

    n, d, k = 1_000_000, 32, 8
    print(f"\n[memory] fit of {n}×{d} rows, K={k}, 3 iterations, through the Python client; peak RSS (VmHWM)")
    w, mu, cov = random_mixture(k, d, SEED + 50)
    x = draw(w, mu, cov, n, SEED + 150)
    saved = os.environ.get("GOMEMLIMIT")
    if b.args.memory_limit:
        os.environ["GOMEMLIMIT"] = b.args.memory_limit  # the daemon and its fitter processes
        print(f"  GOMEMLIMIT={b.args.memory_limit} for the daemon and its fitters")
    try:
        dmn = Daemon(b)  # a fresh daemon, so its peak is this fit's
    finally:
        if saved is None:
            os.environ.pop("GOMEMLIMIT", None)
        else:
            os.environ["GOMEMLIMIT"] = saved
    try:
        pid = dmn.proc.pid
        peaks: Dict[int, int] = {}
        stop = threading.Event()

        names: Dict[int, str] = {}

        def poll() -> None:
            while not stop.is_set():
                for p in [pid, *children(pid)]:
                    peaks[p] = max(peaks.get(p, 0), vm_hwm(p))
                    if p not in names:
                        try:
                            with open(f"/proc/{p}/cmdline", "rb") as f:
                                names[p] = " ".join(a.decode(errors="replace") for a in f.read().split(b"\0")[1:] if a)
                        except OSError:
                            pass
                time.sleep(0.1)

        base = vm_hwm(pid)
        th = threading.Thread(target=poll, daemon=True)
        th.start()
        with mixd.Client(dmn.address) as c:
            t, _ = timed(lambda: c.fit("bench-memory", x, components=k, seed=1, max_iterations=3, restarts=1))
        stop.set()
        th.join()
        for p in [pid, *children(pid)]:
            peaks[p] = max(peaks.get(p, 0), vm_hwm(p))
    finally:
        dmn.close()
    data = x.nbytes
    limit = 3 * data + 200 * 2**20
    daemon_peak = peaks.pop(pid, 0)
    fitter_peak = sum(peaks.values())
    mib = 2**20
    print(f"  fit took {t:.1f} s; daemon at start {base / mib:.0f} MiB; data {data / mib:.0f} MiB; limit {limit / mib:.0f} MiB")
    print(f"  peak: daemon {daemon_peak / mib:.0f} MiB, fitter processes {fitter_peak / mib:.0f} MiB in all")
    for p, v in sorted(peaks.items()):
        print(f"    fitter process {names.get(p, '?')}: {v / mib:.0f} MiB")
    b.record("daemon peak RSS, 1e6×32 fit ÷ (3×data + 200 MiB)", "≤ 1", f"{daemon_peak / limit:.2f} ({daemon_peak / mib:.0f} MiB)", daemon_peak <= limit)
    tot = daemon_peak + fitter_peak
    b.record("daemon + fitter peak RSS ÷ (3×data + 200 MiB)", "≤ 1", f"{tot / limit:.2f} ({tot / mib:.0f} MiB)", tot <= limit)


def section_cache(b: Bench) -> None:
    k, d = 8, 32
    print(f"\n[cache] live heap per cached model, K={k}, D={d}")
    w, mu, cov = random_mixture(k, d, SEED + 60)
    doc = b.path("cache.json")
    write_doc(doc, "cache", w, mu, cov)
    r = b.go("cache", "-model", doc, "-models", "65")
    need = r["parameter_bytes"] + r["factor_bytes"]
    ratio = r["heap_bytes_per_model"] / need
    print(f"  {r['models']} models: {r['heap_bytes_per_model'] / 1024:.1f} KiB each; parameters {r['parameter_bytes'] / 1024:.1f} KiB + factors {r['factor_bytes'] / 1024:.1f} KiB")
    b.record("cached model bytes ÷ (parameters + factors)", "≤ 2", f"{ratio:.2f}", ratio <= 2)


SECTIONS = ("em", "eval", "client", "latency", "growth", "memory", "cache")


def main(argv: Optional[List[str]] = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    ap.add_argument("--rounds", type=int, default=3)
    ap.add_argument("--only", default=",".join(SECTIONS))
    ap.add_argument("--quick", action="store_true")
    ap.add_argument("--keep", action="store_true")
    ap.add_argument("--memory-limit", default="", help="GOMEMLIMIT for the daemon of the memory section (e.g. 300MiB)")
    args = ap.parse_args(argv)
    only = [s.strip() for s in args.only.split(",") if s.strip()]
    for s in only:
        if s not in SECTIONS:
            ap.error(f"--only: unknown section {s!r} (want some of {', '.join(SECTIONS)})")
    if args.quick:
        args.rounds = min(args.rounds, 2)

    import sklearn

    try:
        from threadpoolctl import threadpool_info

        blas = "; ".join(
            f"{i.get('internal_api')} {i.get('version')} kernel {i.get('architecture')} ({i.get('num_threads')} threads)"
            for i in threadpool_info()
        )
    except Exception:  # pragma: no cover - informational only
        blas = "unknown"
    go_version = subprocess.run(["go", "version"], stdout=subprocess.PIPE, text=True).stdout.strip()
    print(f"machine: {os.cpu_count()} CPUs, load average {' '.join(f'{v:.2f}' for v in os.getloadavg())} (shared machine)")
    print(f"{go_version}; python {sys.version.split()[0]}, numpy {np.__version__}, scikit-learn {sklearn.__version__}")
    print(f"BLAS: {blas}; OPENBLAS_CORETYPE={os.environ.get('OPENBLAS_CORETYPE', '(unset)')}")

    work = tempfile.mkdtemp(prefix="mixd-perf-")
    b = Bench(args, work)
    try:
        b.build()
        if "em" in only:
            section_em(b)
        if "eval" in only:
            section_eval(b)
        if "client" in only or "latency" in only:
            dmn = Daemon(b)
            try:
                if "client" in only:
                    section_client(b, dmn)
                if "latency" in only:
                    section_latency(b, dmn)
            finally:
                dmn.close()
        if "growth" in only:
            section_growth(b)
        if "memory" in only:
            section_memory(b)
        if "cache" in only:
            section_cache(b)
    finally:
        if args.keep:
            print(f"kept {work}")
        else:
            shutil.rmtree(work, ignore_errors=True)

    print(f"\nload average at the end: {' '.join(f'{v:.2f}' for v in os.getloadavg())}")
    w = max(len(r[0]) for r in b.rows) if b.rows else 10
    print(f"\n{'ratio':{w}s}  {'target':16s}  {'measured':40s}  met")
    for name, target, measured, met in b.rows:
        print(f"{name:{w}s}  {target:16s}  {measured:40s}  {'-' if met is None else 'yes' if met else 'NO'}")
    for note in b.notes:
        print(f"note: {note}")
    return 0 if not b.notes else 1


if __name__ == "__main__":
    sys.exit(main())
