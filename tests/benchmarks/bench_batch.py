"""Benchmark: ``chairbuild batch`` machinery (Dask workers, sandboxes, SQLite store) on 200 molecules.

The set (``tests/benchmarks/data/batch_200.smi``, molecules of our own): 40 monosubstituted and
60 disubstituted cyclohexanes, 35 piperidines, 34 tetrahydropyrans, 31 drug-like fragments.
Everything goes through :func:`chairbuild.analyze_many` and its store, at the default MMFF94
level, measured side by side in one run:

* molecules per minute with 1 and 2 workers, speed-up and parallel efficiency;
* molecules per minute per core on the monosubstituted cyclohexanes (1 worker);
* per-molecule overhead of the batch machinery as a fraction of compute, twice:
  from wall time, ``(workers x (batch wall - fixed start-up wall) - sum of analysis wall) /
  sum of analysis wall``, and from CPU time, ``(CPU of the driver, workers and sandboxes -
  fixed start-up CPU - sum of analysis CPU) / sum of analysis CPU``; the start-up costs are
  measured on a one-molecule batch with the same worker count; CPU time is much less
  sensitive to other load on the machine than wall time;
* peak memory per worker (the Dask worker process and its sandbox child).

Targets: >= 1.8x on 2 workers; >= 60 molecules/min/core on monosubstituted cyclohexanes;
overhead <= 5 %. Run: ``make bench`` or ``python tests/benchmarks/bench_batch.py``.
"""

from __future__ import annotations

import tempfile
import threading
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
DATA = HERE / "data" / "batch_200.smi"


class _TreeSampler:
    """Samples CPU time and memory of this process and all its descendants four times a second.

    The CPU a process spends after its last sample is missed; it is about the same in the
    one-molecule batch that measures the fixed costs, so the difference cancels.
    """

    def __init__(self, period: float = 0.25) -> None:
        import psutil

        self.me = psutil.Process()
        self.period = period
        self.cpu: dict[int, float] = {}
        self.rss: dict[int, float] = {}
        self.kind: dict[int, str] = {}
        self._stop = threading.Event()
        self._thread = threading.Thread(target=self._loop, daemon=True)

    def _sample(self) -> None:
        import psutil

        procs = [self.me] + self.me.children(recursive=True)
        for p in procs:
            try:
                with p.oneshot():
                    t = p.cpu_times()
                    self.cpu[p.pid] = t.user + t.system
                    self.rss[p.pid] = max(self.rss.get(p.pid, 0.0), p.memory_info().rss / 2**20)
                    if p.pid == self.me.pid:
                        self.kind[p.pid] = "driver"
                    elif self.kind.get(p.pid) != "sandbox":  # a fresh child shows its parent's command until it execs
                        self.kind[p.pid] = "sandbox" if "chairbuild.batch.sandbox" in " ".join(p.cmdline()) else "worker"
            except (psutil.NoSuchProcess, psutil.AccessDenied):
                continue

    def _loop(self) -> None:
        while not self._stop.wait(self.period):
            self._sample()

    def __enter__(self) -> "_TreeSampler":
        self._sample()
        self.cpu0 = dict(self.cpu)
        self._thread.start()
        return self

    def __exit__(self, *exc) -> None:
        self._stop.set()
        self._thread.join()

    def total_cpu(self) -> float:
        return sum(v - self.cpu0.get(pid, 0.0) for pid, v in self.cpu.items())

    def cpu_of(self, kind: str) -> float:
        return sum(v - self.cpu0.get(pid, 0.0) for pid, v in self.cpu.items() if self.kind.get(pid) == kind)

    def peak(self, kind: str) -> float:
        return max((self.rss[p] for p, k in self.kind.items() if k == kind), default=float("nan"))


def _read_set() -> list[tuple[str, str]]:
    rows = []
    for line in DATA.read_text().splitlines():
        if line.strip() and not line.startswith("#"):
            smiles, name = line.split(None, 1)
            rows.append((smiles, name.strip()))
    return rows


def _batch(smiles: list[str], names: list[str], workers: int) -> dict:
    """Run one batch through the store; the figures of one measurement."""
    import chairbuild

    with tempfile.TemporaryDirectory(prefix="bench-batch-") as folder:
        with _TreeSampler() as sampler:
            t0 = time.perf_counter()
            run = chairbuild.analyze_many(smiles, names=names, out=folder, workers=workers).run()
            wall = time.perf_counter() - t0
        with chairbuild.open_store(folder) as reader:
            df = reader.summary()
    return {
        "n": len(df),
        "ok": int((df["status"] == "ok").sum()),
        "wall": wall,
        "tree_cpu": sampler.total_cpu(),
        "cpu_by_kind": {k: sampler.cpu_of(k) for k in ("driver", "worker", "sandbox")},
        "failed": [f"{r.name}: {r.status} ({r.error})" for r in df.itertuples() if r.status != "ok"],
        "sum_cpu": float(df["cpu_s"].sum()),
        "sum_wall": float(df["wall_s"].sum()),
        "peak_sandbox_mb": float(df["peak_rss_mb"].max()),
        "peak_worker_mb": sampler.peak("worker"),
        "peak_driver_mb": sampler.peak("driver"),
    }


def _overheads(m: dict, fixed: dict, workers: int) -> tuple[float, float]:
    wall_over = (workers * (m["wall"] - fixed["wall"]) - m["sum_wall"]) / m["sum_wall"]
    cpu_over = (m["tree_cpu"] - (fixed["tree_cpu"] - fixed["sum_cpu"]) - m["sum_cpu"]) / m["sum_cpu"]
    return wall_over, cpu_over


def main(only_mono: bool = False) -> None:
    rows = _read_set()
    smiles = [s for s, _ in rows]
    names = [n for _, n in rows]
    mono = [(s, n) for s, n in rows if n.startswith("mono-")]
    print(f"set: {len(rows)} molecules ({len(mono)} monosubstituted cyclohexanes), default options (MMFF94, twist-boats)")
    _batch(["C1CCCCC1"], ["warm-up"], 1)  # file-system caches, first imports
    fixed = {w: _batch(["C1CCCCC1"], ["cyclohexane"], w) for w in (1, 2)}
    for w, f in fixed.items():
        print(f"fixed start-up with {w} worker(s) (one-molecule batch): wall {f['wall']:.2f} s, CPU {f['tree_cpu'] - f['sum_cpu']:.2f} s")
    m_mono = _batch([s for s, _ in mono], [n for _, n in mono], 1)
    if only_mono:
        print(f"mono: wall {m_mono['wall']:.2f} s, CPU {m_mono['tree_cpu']:.2f} s, analysis {m_mono['sum_cpu']:.2f} s, "
              + ", ".join(f"{k} {v - fixed[1]['cpu_by_kind'][k]:.2f} s" for k, v in m_mono["cpu_by_kind"].items()))
        return
    runs = {w: _batch(smiles, names, w) for w in (1, 2)}
    print()
    header = f"{'batch':34s} {'rows':>5s} {'ok':>4s} {'wall s':>7s} {'mol/min':>8s} {'mol/min/core':>12s} {'overhead wall':>13s} {'overhead CPU':>12s}"
    print(header)
    print("-" * len(header))
    for label, m, w in (("monosubstituted, 1 worker", m_mono, 1), ("all 200, 1 worker", runs[1], 1), ("all 200, 2 workers", runs[2], 2)):
        wall_over, cpu_over = _overheads(m, fixed[w], w)
        rate = 60.0 * m["n"] / m["wall"]
        print(f"{label:34s} {m['n']:5d} {m['ok']:4d} {m['wall']:7.1f} {rate:8.1f} {rate / w:12.1f} {100 * wall_over:12.1f}% {100 * cpu_over:11.1f}%")
    print()
    for label, m, w in (("monosubstituted, 1 worker", m_mono, 1), ("all 200, 1 worker", runs[1], 1), ("all 200, 2 workers", runs[2], 2)):
        f = fixed[w]["cpu_by_kind"]
        parts = ", ".join(f"{k} {m['cpu_by_kind'][k] - f[k]:.2f} s" for k in ("driver", "worker", "sandbox"))
        print(f"CPU beyond the fixed start-up, {label}: {parts}; analysis itself {m['sum_cpu']:.2f} s")
    for m in runs.values():
        for line in m["failed"]:
            print(f"not ok: {line}")
    speedup = runs[1]["wall"] / runs[2]["wall"]
    steady = (runs[1]["wall"] - fixed[1]["wall"]) / (runs[2]["wall"] - fixed[2]["wall"])
    print()
    print(f"speed-up on 2 workers: {speedup:.2f}x (parallel efficiency {100 * speedup / 2:.0f} %); "
          f"without the fixed start-up: {steady:.2f}x (target >= 1.8x)")
    mono_rate = 60.0 * m_mono["n"] / m_mono["wall"]
    mono_steady = 60.0 * m_mono["n"] / (m_mono["wall"] - fixed[1]["wall"])
    print(f"monosubstituted cyclohexanes, 1 worker: {mono_rate:.1f} molecules/min/core including start-up, "
          f"{mono_steady:.1f} without it (target >= 60)")
    print(f"analysis CPU per molecule: mono {m_mono['sum_cpu'] / m_mono['n']:.3f} s, all {runs[1]['sum_cpu'] / runs[1]['n']:.3f} s")
    for w in (1, 2):
        m = runs[w]
        print(f"peak memory, {w} worker(s): sandbox {m['peak_sandbox_mb']:.0f} MiB, Dask worker process "
              f"{m['peak_worker_mb']:.0f} MiB, driver {m['peak_driver_mb']:.0f} MiB")
    print("(overhead target <= 5 %; wall-time figures are depressed when other jobs share the cores, the CPU figure much less)")


if __name__ == "__main__":
    import sys

    main(only_mono="--mono" in sys.argv[1:])
