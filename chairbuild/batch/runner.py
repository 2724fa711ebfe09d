"""The batch driver: reads the input, submits one Dask task per record, writes the store.

One code path serves both kinds of parallelism: ``workers=N`` starts a
``distributed.LocalCluster`` of N worker processes with one thread each, ``scheduler=ADDRESS``
connects a ``distributed.Client`` to a running cluster; either way the same task
(:func:`chairbuild.batch.sandbox.run_task`) is submitted, and only this process writes the
store. Each molecule runs in a sandbox child of its worker (see :mod:`chairbuild.batch.sandbox`),
so a crash or a timeout costs that molecule only. A worker process that dies itself is
retried once by the scheduler (``allowed-failures`` 1 on a local cluster) and then written
as ``crashed``.

:func:`analyze_many` returns a :class:`BatchRun`: iterate over it to get one
:class:`BatchResult` per input record as the batch proceeds (in input order by default),
or call :meth:`BatchRun.summary` to run it to the end and get the summary DataFrame.
"""

from __future__ import annotations

import itertools
import os
import tempfile
from dataclasses import dataclass
from pathlib import Path
from typing import Any, Iterable, Iterator, Mapping

from chairbuild.batch.records import (
    TRANSIENT,
    InputRecord,
    RowStatus,
    content_key,
    read_records,
    records_from_molecules,
    result_options,
)
from chairbuild.errors import InputError, OptionError

__all__ = ["analyze_many", "BatchRun", "BatchResult", "default_workers"]


def default_workers(threads: int = 1) -> int:
    """Worker processes that fill this machine's usable CPUs with ``threads`` threads each."""
    try:
        cpus = len(os.sched_getaffinity(0))
    except AttributeError:  # not Linux
        cpus = os.cpu_count() or 1
    return max(1, cpus // max(1, threads))


@dataclass(frozen=True)
class BatchResult:
    """One input record's outcome.

    Attributes
    ----------
    index : int
        0-based position in the input.
    name : str
    status : RowStatus
    error : str
        One-line reason when the status is not ``ok``.
    summary : dict or None
        The summary figures (see :mod:`chairbuild.batch.summary`), energies in kJ/mol.
    wall_s : float or None
        Time of the analysis itself.
    computed : bool
        False when the row was kept from an earlier run (``resume``).
    """

    index: int
    name: str
    status: RowStatus
    error: str
    summary: Mapping[str, Any] | None
    wall_s: float | None
    computed: bool
    ensemble_json: str | None = None

    @property
    def ok(self) -> bool:
        return self.status is RowStatus.OK

    @property
    def ensemble(self):
        """The :class:`~chairbuild.result.Ensemble` (None for a failed row)."""
        from chairbuild.result import Ensemble

        return None if self.ensemble_json is None else Ensemble.from_json(self.ensemble_json)

    def __repr__(self) -> str:
        tail = f", error={self.error!r}" if self.error else ""
        return f"BatchResult(index={self.index}, name={self.name!r}, status={self.status.value!r}{tail})"


def _records(molecules, names, smiles_column, name_column) -> tuple[list[InputRecord], str]:
    if isinstance(molecules, (str, Path)):
        path = Path(molecules)
        if not path.is_file() and not path.is_dir():
            raise InputError(
                f"{str(molecules)!r} is not a file; give a SMILES/CSV/SDF file or a list of SMILES strings or RDKit molecules"
            )
        if names is not None:
            raise InputError("names apply to a list of molecules, not to a file (use a name column)")
        return read_records(path, smiles_column, name_column), str(path)
    if smiles_column or name_column:
        raise InputError("smiles_column and name_column apply to CSV/TSV input only")
    return records_from_molecules(molecules, names), "python"


class BatchRun:
    """A batch of analyses, run through the store in ``out`` (see :func:`analyze_many`).

    Iterating yields one :class:`BatchResult` per input record (the batch starts on the
    first ``next``); it can be iterated once. :meth:`summary`, :meth:`families` and
    :meth:`store` run whatever is left first.
    """

    def __init__(
        self,
        records: list[InputRecord],
        source: str,
        out: "str | Path | None",
        *,
        options: Mapping[str, Any],
        workers: int | None,
        scheduler: str | None,
        timeout: float | None,
        resume: bool,
        overwrite: bool,
        retry_failed: bool,
        progress: bool,
        order: str,
        faults: Mapping[int, str] | None,
    ) -> None:
        from chairbuild import __version__
        from chairbuild.batch.sandbox import TEST_FAULTS
        from chairbuild.batch.store import Store
        from chairbuild.pipeline import _options

        opts = _options(dict(options))
        self.threads = 1 if opts.threads is None else opts.threads
        if scheduler is not None and workers is not None:
            raise OptionError("workers and scheduler exclude each other: the cluster's own workers run the tasks")
        if workers is not None and workers < 1:
            raise OptionError(f"workers must be at least 1, got {workers}")
        if timeout is not None and not timeout > 0:
            raise OptionError(f"timeout must be a positive number of seconds, got {timeout}")
        if order not in ("input", "completed"):
            raise OptionError(f"order must be 'input' or 'completed', got {order!r}")
        for index, kind in (faults or {}).items():
            if kind not in TEST_FAULTS:
                raise OptionError(f"unknown test fault {kind!r}; choose from: {', '.join(TEST_FAULTS)}")
        self.records = records
        self.source = source
        self.version = __version__
        self.result_options = result_options(opts)
        self.task_options = {k: v for k, v in self.result_options.items() if k != "extra"}
        self.task_options.update(threads=self.threads, progress=False)
        self.workers = workers if workers is not None or scheduler is not None else default_workers(self.threads)
        self.scheduler = scheduler
        self.timeout = timeout
        self.progress = progress
        self.order = order
        self.faults = dict(faults or {})
        self.retry = tuple(s.value for s in TRANSIENT) if retry_failed else ()
        self._tmp = tempfile.TemporaryDirectory(prefix="chairbuild-batch-") if out is None else None
        self.out = Path(self._tmp.name if out is None else out)
        self.keys = [content_key(r, self.result_options, self.version) for r in records]
        self._store = Store(self.out, resume=resume, overwrite=overwrite)
        self._started = False
        self._finished = False
        self.n_computed = 0
        self.n_skipped = 0
        self.counts: dict[str, int] = {}

    # ------------------------------------------------------------------ public
    @property
    def path(self) -> Path:
        """The store file."""
        return self._store.path

    def __iter__(self) -> Iterator[BatchResult]:
        if self._started:
            raise RuntimeError("a BatchRun can be iterated once; read the store (open_store) for the results again")
        self._started = True
        return self._execute()

    def run(self) -> "BatchRun":
        """Run the batch to the end (if not done yet) and return self."""
        if not self._started:
            for _ in self:
                pass
        elif not self._finished:
            raise RuntimeError("the batch is being iterated; finish the iteration first")
        return self

    def store(self):
        """A :class:`~chairbuild.batch.store.StoreReader` on the finished batch."""
        from chairbuild.batch.store import open_store

        self.run()
        return open_store(self.path)

    def summary(self, unit: str = "kJ/mol"):
        """The summary DataFrame (one row per input record, input order), after running the batch."""
        with self.store() as reader:
            return reader.summary(unit)

    def families(self, unit: str = "kJ/mol"):
        """The ring-family DataFrame, after running the batch."""
        with self.store() as reader:
            return reader.families(unit)

    @property
    def n_failed(self) -> int:
        """Rows of the whole store whose status is not ok (after the run)."""
        return sum(n for s, n in self.counts.items() if s != RowStatus.OK.value)

    # ---------------------------------------------------------------- engine
    def _stored_result(self, index: int) -> BatchResult:
        import json

        row = self._store.conn.execute(
            "SELECT name, status, error, summary, wall_s, ensemble FROM records WHERE idx = ?", (index,)
        ).fetchone()
        return BatchResult(index, row["name"], RowStatus.parse(row["status"]), row["error"],
                           None if row["summary"] is None else json.loads(row["summary"]), row["wall_s"], False,
                           row["ensemble"])

    def _execute(self) -> Iterator[BatchResult]:
        store = self._store
        workers_text = "cluster" if self.scheduler else str(self.workers)
        todo = store.begin_run(self.records, self.keys, self.result_options, self.source, workers_text, self.scheduler, self.retry)
        self.n_skipped = len(self.records) - len(todo)
        todo_set = set(todo)
        ready: dict[int, BatchResult] = {}
        next_out = 0

        def emit(result: BatchResult | None) -> Iterator[BatchResult]:
            nonlocal next_out
            if self.order == "completed":
                if result is not None:
                    yield result
                return
            if result is not None:
                ready[result.index] = result
            while next_out < len(self.records):
                if next_out in ready:
                    yield ready.pop(next_out)
                elif next_out not in todo_set:
                    yield self._stored_result(next_out)
                else:
                    break
                next_out += 1

        if self.order == "completed":
            for i in range(len(self.records)):
                if i not in todo_set:
                    yield self._stored_result(i)
        bar = self._bar(len(todo))
        try:
            dispatch = []
            for i in todo:
                rec = self.records[i]
                if rec.error:  # unparsable: its row is written here, no worker needed
                    reply = {"status": RowStatus.BAD_INPUT.value, "error": rec.error, "worker": "driver", "wall_s": 0.0, "cpu_s": 0.0}
                    yield from emit(self._finish(rec, reply, bar))
                else:
                    dispatch.append(rec)
            if dispatch:
                for rec, reply in self._dispatch(dispatch):
                    yield from emit(self._finish(rec, reply, bar))
            yield from emit(None)
            store.end_run()
            self._finished = True
        finally:
            if bar is not None:
                bar.close()
            self.counts = dict(store.conn.execute("SELECT status, count(*) FROM records GROUP BY status").fetchall())

    def _bar(self, total: int):
        if not self.progress or total == 0:
            return None
        from tqdm.auto import tqdm

        bar = tqdm(total=total, unit="mol", desc="batch", dynamic_ncols=True, smoothing=0.1)
        bar.set_postfix_str("failed 0")
        self._n_failed_run = 0
        return bar

    def _finish(self, rec: InputRecord, reply: dict, bar) -> BatchResult:
        self._store.write_result(rec.index, self.keys[rec.index], reply)
        self.n_computed += 1
        status = RowStatus.parse(reply["status"])
        if bar is not None:
            if status is not RowStatus.OK:
                self._n_failed_run += 1
                bar.set_postfix_str(f"failed {self._n_failed_run}", refresh=False)
            bar.update(1)
        return BatchResult(rec.index, rec.name, status, reply.get("error", ""), reply.get("summary"),
                           reply.get("wall_s"), True, reply.get("ensemble_json"))

    def _task(self, rec: InputRecord) -> dict:
        return {
            "index": rec.index,
            "kind": rec.kind,
            "payload": rec.payload,
            "name": rec.name,
            "location": rec.location,
            "options": self.task_options,
            "threads": self.threads,
            "timeout": self.timeout,
            "version": self.version,
            "fault": self.faults.get(rec.index),
        }

    def _dispatch(self, records: list[InputRecord]) -> Iterator[tuple[InputRecord, dict]]:
        from distributed import as_completed

        from chairbuild.batch.sandbox import run_task

        client, cluster = _dask_client(self.workers, self.scheduler)
        try:
            slots = max(1, sum(client.nthreads().values()))
            window = max(16, 4 * slots)
            pending = iter(records)
            by_key: dict[str, InputRecord] = {}

            def submit(rec: InputRecord):
                key = f"chairbuild-{self.keys[rec.index][:16]}-{rec.index}"
                by_key[key] = rec
                return client.submit(run_task, self._task(rec), key=key, pure=False)

            queue = as_completed([submit(rec) for rec in itertools.islice(pending, window)])
            for future in queue:
                rec = by_key.pop(future.key)
                yield rec, _reply_of(future)
                future.release()
                nxt = next(pending, None)
                if nxt is not None:
                    queue.add(submit(nxt))
        finally:
            client.close()
            if cluster is not None:
                cluster.close()


def _reply_of(future) -> dict:
    from distributed import KilledWorker

    from chairbuild.batch.records import describe_failure

    try:
        return future.result()
    except KilledWorker:
        return {"status": RowStatus.CRASHED.value, "error": "the worker process running it died twice (Dask KilledWorker)"}
    except Exception as exc:  # a task that failed outside the sandbox is still a row
        return {"status": RowStatus.FAILED.value, "error": describe_failure(exc)}


def _dask_client(workers: int | None, scheduler: str | None):
    import logging

    import dask
    from distributed import Client, LocalCluster

    if scheduler is not None:
        try:
            return Client(scheduler, timeout="30s"), None
        except (OSError, TimeoutError, ValueError) as exc:
            raise OptionError(f"cannot reach the Dask scheduler at {scheduler!r}: {exc}") from None
    # no memory limit on the worker processes (the molecules run in their sandbox children, whose
    # out-of-memory deaths are rows of their own), a slower system monitor, no profiler, no work
    # stealing, and the event-loop watchdog ticking once a second instead of every 20 ms (idle cluster
    # of one worker: 3.7 % -> 0.9 % of a core): all cut the CPU the cluster spends beside the analyses
    # (measured in bench_batch.py)
    settings = {
        "distributed.admin.tick.interval": "1s",
        "distributed.scheduler.allowed-failures": 1,
        "distributed.worker.daemon": False,
        "distributed.admin.system-monitor.interval": "2s",
        "distributed.worker.profile.enabled": False,  # the statistical profiler samples every 10 ms
        "distributed.scheduler.work-stealing": False,  # tasks reach workers only as slots free up (queuing)
    }
    with dask.config.set(settings):
        cluster = LocalCluster(
            n_workers=workers,
            threads_per_worker=1,
            processes=True,
            dashboard_address=None,
            silence_logs=logging.ERROR,
            memory_limit=0,
        )
        client = Client(cluster)
    return client, cluster


def analyze_many(
    molecules: "Iterable[Any] | str | Path",
    *,
    out: "str | Path | None" = None,
    names: "list[str] | None" = None,
    workers: int | None = None,
    scheduler: str | None = None,
    timeout: float | None = None,
    resume: bool = False,
    overwrite: bool = False,
    retry_failed: bool = False,
    smiles_column: str | None = None,
    name_column: str | None = None,
    progress: bool = False,
    order: str = "input",
    _test_faults: Mapping[int, str] | None = None,
    **options: Any,
) -> BatchRun:
    """Analyse many molecules through a batch store, in parallel.

    Parameters
    ----------
    molecules : iterable or str or pathlib.Path
        SMILES strings and/or RDKit molecules, or the path of a SMILES file (``.smi``),
        a CSV/TSV table or a multi-record SDF.
    out : str or pathlib.Path, optional
        Output folder of the store (``results.sqlite``); default a temporary folder that is
        removed with the returned object.
    names : list of str, optional
        One name per molecule (list input only).
    workers : int, optional
        Local worker processes (default: one per usable CPU, divided by ``threads``).
    scheduler : str, optional
        Address of a running Dask scheduler (``tcp://host:8786``) instead of local workers.
    timeout : float, optional
        Seconds per molecule; a molecule past it gets the status ``timeout``.
    resume, overwrite : bool
        Continue an existing store in ``out`` (rows whose content key matches are kept),
        or replace it. Without either, an existing store is refused.
    retry_failed : bool
        With ``resume``, compute again the rows that timed out or crashed.
    smiles_column, name_column : str, optional
        Columns of a CSV/TSV input.
    progress : bool
        Progress bar on stderr (count, rate, failures, ETA).
    order : {"input", "completed"}
        Order in which results are yielded.
    **options
        Every option of :func:`chairbuild.analyze` (``threads`` is per molecule, default 1).

    Returns
    -------
    BatchRun
        Iterable of :class:`BatchResult` (one per input record); ``.summary()`` runs the
        batch to the end and returns the summary ``pandas.DataFrame``; ``.store()`` opens
        the store for reading.

    Raises
    ------
    InputError, OptionError, OutputError
        Bad input file, options or output folder (before any molecule is computed).

    Notes
    -----
    With local workers, Dask starts worker processes by ``spawn``: in a script, call
    this under ``if __name__ == "__main__":``.

    Examples
    --------
    >>> run = chairbuild.analyze_many(["CC1CCCCC1", "OC1CCCCC1"], workers=2)  # doctest: +SKIP
    >>> for result in run:                                                 # doctest: +SKIP
    ...     print(result.index, result.status.value, result.summary["global_min_shape"])
    >>> run.summary()                                                      # doctest: +SKIP
    """
    records, source = _records(molecules, names, smiles_column, name_column)
    return BatchRun(
        records,
        source,
        out,
        options=options,
        workers=workers,
        scheduler=scheduler,
        timeout=timeout,
        resume=resume,
        overwrite=overwrite,
        retry_failed=retry_failed,
        progress=progress,
        order=order,
        faults=_test_faults,
    )
