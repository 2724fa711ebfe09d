"""Where one molecule is computed: a sandbox process owned by the worker.

Each worker thread keeps one long-lived child process (``python -m chairbuild.batch.sandbox``)
that imports chairbuild once and then analyses molecules one at a time, sent over a pipe.
The worker waits for each answer with the molecule's time limit. A segfault in native
code, an out-of-memory kill or a hang past ``timeout`` therefore ends only that child: the
worker writes the row's status (``crashed`` or ``timeout``) and starts a fresh child for
the next molecule. Because the child lives on, the per-molecule cost of the isolation is
one pipe round trip, not a process start.

Frames on the pipe are an 8-byte big-endian length followed by a pickle. The child's
own stdout is redirected to its stderr so that nothing but frames reaches the pipe, and
it exits when its parent dies (a watchdog thread polls the parent id).

:func:`run_task` is the function submitted to Dask (the same one for local workers and
for a cluster).
"""

from __future__ import annotations

import os
import pickle
import select
import signal
import socket
import struct
import subprocess
import sys
import threading
import time
from typing import Any

__all__ = ["run_task", "Sandbox", "TEST_FAULTS"]

_HEADER = struct.Struct(">Q")

#: Fault injections for tests only (``--test-fault INDEX=KIND``, see DEVELOPERS.md).
TEST_FAULTS = ("exit", "segv", "kill", "convergence")

#: How long a fresh sandbox may take to import chairbuild and warm up (s).
STARTUP_TIMEOUT_S = 300.0


# ----------------------------------------------------------------------------- framing
def _write_frame(fd: int, obj: Any) -> None:
    data = pickle.dumps(obj, protocol=pickle.HIGHEST_PROTOCOL)
    view = memoryview(_HEADER.pack(len(data)) + data)
    while view:
        n = os.write(fd, view)
        view = view[n:]


class _Closed(Exception):
    """The other end of the pipe closed (the process died)."""


class _TimedOut(Exception):
    """No complete frame within the deadline."""


def _read_exact(fd: int, n: int, deadline: float | None) -> bytes:
    chunks = []
    while n:
        if deadline is not None:
            left = deadline - time.monotonic()
            if left <= 0:
                raise _TimedOut
            ready, _, _ = select.select([fd], [], [], left)
            if not ready:
                raise _TimedOut
        chunk = os.read(fd, min(n, 1 << 20))
        if not chunk:
            raise _Closed
        chunks.append(chunk)
        n -= len(chunk)
    return b"".join(chunks)


def _read_frame(fd: int, deadline: float | None) -> Any:
    (size,) = _HEADER.unpack(_read_exact(fd, _HEADER.size, deadline))
    return pickle.loads(_read_exact(fd, size, deadline))


# ------------------------------------------------------------------------ child side
def _watch_parent(parent: int) -> None:
    while True:
        time.sleep(1.0)
        if os.getppid() != parent:
            os._exit(3)


def _rebuild(task: dict):
    import base64

    from rdkit import Chem

    from chairbuild.errors import InputError

    kind, payload = task["kind"], task["payload"]
    if kind == "smiles":
        from rdkit import RDLogger

        RDLogger.DisableLog("rdApp.*")
        try:
            mol = Chem.MolFromSmiles(payload)
        finally:
            RDLogger.EnableLog("rdApp.*")
        if mol is None:
            raise InputError(f"invalid SMILES {payload!r}")
        return mol
    if kind == "molblock":
        mol = Chem.MolFromMolBlock(payload, removeHs=False, sanitize=True)
        if mol is None:
            raise InputError(f"{task['location']} is not a valid molecule")
        return mol
    if kind == "rdkit":
        return Chem.Mol(base64.b64decode(payload))
    raise InputError(f"unknown record kind {kind!r}")


def _peak_rss_mb() -> float:
    import resource

    return resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024.0  # kB on Linux


def _analyse(task: dict) -> dict:
    """Analyse one record inside the sandbox; every outcome is a reply, never an exception."""
    import traceback

    from chairbuild.batch.records import RowStatus, describe_failure, status_of_exception
    from chairbuild.batch.summary import summarise
    from chairbuild.errors import ConvergenceError
    from chairbuild.pipeline import analyze

    fault = task.get("fault")
    if fault == "exit":
        os._exit(70)
    if fault == "segv":
        os.kill(os.getpid(), signal.SIGSEGV)
    if fault == "kill":
        os.kill(os.getpid(), signal.SIGKILL)
    t0, c0 = time.perf_counter(), time.process_time()
    reply: dict[str, Any] = {"status": RowStatus.OK.value, "error": "", "detail": "", "summary": None, "ensemble_json": None}
    try:
        if fault == "convergence":
            raise ConvergenceError("SCF did not converge (injected by --test-fault)")
        mol = _rebuild(task)
        ens = analyze(mol, name=task["name"], **task["options"])
        reply["summary"] = summarise(ens)
        reply["ensemble_json"] = ens.to_json(indent=None)
    except Exception as exc:  # every failure of one molecule is data for its row
        reply["status"] = status_of_exception(exc).value
        reply["error"] = describe_failure(exc)
        reply["detail"] = "" if reply["status"] == RowStatus.BAD_INPUT.value else traceback.format_exc(limit=8)
    reply["wall_s"] = time.perf_counter() - t0
    reply["cpu_s"] = time.process_time() - c0
    reply["peak_rss_mb"] = _peak_rss_mb()
    return reply


def _child_main() -> int:
    out_fd = os.dup(1)
    os.dup2(2, 1)  # stray prints must not corrupt the frames
    sys.stdout = os.fdopen(1, "w", buffering=1)
    in_fd = sys.stdin.fileno()
    threading.Thread(target=_watch_parent, args=(os.getppid(),), daemon=True).start()
    import chairbuild.pipeline  # noqa: F401 - import once, before the first molecule
    from chairbuild.pipeline import analyze

    analyze("C1CCCCC1", twist_boats=False, threads=1)  # warm-up: OpenMM plugins, caches
    _write_frame(out_fd, {"ready": True, "pid": os.getpid()})
    while True:
        try:
            task = _read_frame(in_fd, None)
        except _Closed:
            return 0
        _write_frame(out_fd, _analyse(task))


# ----------------------------------------------------------------------- worker side
def _signal_name(code: int) -> str:
    try:
        return signal.Signals(code).name
    except ValueError:
        return f"signal {code}"


class Sandbox:
    """One sandbox child process, restarted after a crash or a timeout.

    Parameters
    ----------
    threads : int
        CPU threads the child may use (OpenMP, OpenMM, BLAS): set through the environment
        so that N workers with one thread each do not oversubscribe N cores.
    """

    def __init__(self, threads: int = 1) -> None:
        self.threads = int(threads)
        self.proc: subprocess.Popen | None = None
        self.starts = 0

    def _start(self) -> None:
        n = str(self.threads)
        env = dict(os.environ)
        for var in ("OMP_NUM_THREADS", "OPENMM_CPU_THREADS", "OPENBLAS_NUM_THREADS", "MKL_NUM_THREADS", "PYSCF_MAX_THREADS"):
            env[var] = n
        self.proc = subprocess.Popen(
            [sys.executable, "-m", "chairbuild.batch.sandbox"],
            stdin=subprocess.PIPE,
            stdout=subprocess.PIPE,
            stderr=subprocess.DEVNULL,
            env=env,
            close_fds=True,
        )
        self.starts += 1
        try:
            hello = _read_frame(self.proc.stdout.fileno(), time.monotonic() + STARTUP_TIMEOUT_S)
        except (_Closed, _TimedOut):
            code = self._reap()
            raise RuntimeError(f"the sandbox process did not start (exit status {code})") from None
        if not hello.get("ready"):
            raise RuntimeError("the sandbox process sent an unexpected first message")

    def _reap(self) -> int | None:
        proc, self.proc = self.proc, None
        if proc is None:
            return None
        if proc.poll() is None:
            proc.kill()
        try:
            return proc.wait(timeout=30)
        except subprocess.TimeoutExpired:
            return None
        finally:
            for stream in (proc.stdin, proc.stdout):
                if stream is not None:
                    stream.close()

    def close(self) -> None:
        """Stop the child (it would also exit by itself when this process ends)."""
        self._reap()

    def run(self, task: dict, timeout: float | None) -> dict:
        """Analyse one task in the child; return its reply (a crash or a timeout is a reply too)."""
        from chairbuild.batch.records import RowStatus

        if self.proc is None or self.proc.poll() is not None:
            self._reap()
            self._start()
        t0 = time.perf_counter()
        try:
            _write_frame(self.proc.stdin.fileno(), task)
            deadline = None if timeout is None else time.monotonic() + timeout
            return _read_frame(self.proc.stdout.fileno(), deadline)
        except _TimedOut:
            self._reap()
            return {"status": RowStatus.TIMEOUT.value, "error": f"no result within the time limit of {timeout:g} s",
                    "wall_s": time.perf_counter() - t0}
        except (_Closed, BrokenPipeError):
            code = self._reap()
            if code is not None and code < 0:
                how = f"killed by {_signal_name(-code)}"
                if -code == signal.SIGKILL:
                    how += " (the out-of-memory killer sends this)"
            else:
                how = f"exited with status {code}"
            return {"status": RowStatus.CRASHED.value, "error": f"the process analysing it died: {how}",
                    "wall_s": time.perf_counter() - t0}


_LOCAL = threading.local()


def _sandbox(threads: int) -> Sandbox:
    box = getattr(_LOCAL, "sandbox", None)
    if box is None or box.threads != threads:
        if box is not None:
            box.close()
        box = _LOCAL.sandbox = Sandbox(threads)
    return box


def run_task(task: dict) -> dict:
    """The Dask task: analyse one record in this worker thread's sandbox.

    Parameters
    ----------
    task : dict
        ``index``, ``kind``, ``payload``, ``name``, ``location``, ``options`` (keyword
        arguments of :func:`chairbuild.analyze`), ``threads``, ``timeout`` (s or None),
        ``version`` (the driver's chairbuild version) and ``fault`` (tests only).

    Returns
    -------
    dict
        ``status``, ``error``, ``detail``, ``summary``, ``ensemble_json``, ``wall_s``,
        ``cpu_s``, ``peak_rss_mb``, ``worker``, ``index``.
    """
    from chairbuild import __version__
    from chairbuild.batch.records import RowStatus

    if task["version"] != __version__:
        reply = {"status": RowStatus.FAILED.value,
                 "error": f"the worker runs chairbuild {__version__}, the driver {task['version']}; install the same version"}
    else:
        try:
            reply = _sandbox(task["threads"]).run(task, task["timeout"])
        except RuntimeError as exc:
            reply = {"status": RowStatus.CRASHED.value, "error": str(exc)}
    reply["index"] = task["index"]
    reply["worker"] = f"{socket.gethostname()}:{os.getpid()}"
    return reply


if __name__ == "__main__":
    sys.exit(_child_main())
