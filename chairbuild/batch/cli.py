"""The ``chairbuild batch`` subcommand (parser and runner; wired in :mod:`chairbuild.cli`).

Exit status: 0 when every row is ``ok``, 1 when some rows failed (each has its status
and message in the store and the tables), 2 for a bad invocation (nothing computed).
"""

from __future__ import annotations

import argparse
import sys
from typing import Callable

__all__ = ["add_batch_parser", "run_batch_command", "EXIT_SOME_FAILED"]

EXIT_SOME_FAILED = 1


def add_batch_parser(sub, add_analysis_options: Callable, positive_int: Callable, positive_float: Callable) -> None:
    """Add ``batch`` to the subcommands ``sub``, with every analysis option of ``analyze``."""
    from chairbuild.batch.export import MOLECULE_FORMATS, TABLE_FORMATS

    p = sub.add_parser(
        "batch",
        help="analyse every molecule of a SMILES, CSV/TSV or SDF file into a store, in parallel",
        description="Analyse every record of INPUT, in parallel, into the store DIR/results.sqlite; write "
        "DIR/summary.csv|parquet (one row per input record, in input order) and DIR/families.csv|parquet. "
        "Exit status 0: every row ok; 1: some rows failed (see their status and error); 2: bad invocation.",
    )
    p.add_argument("input", help="SMILES file (.smi/.smiles/.txt: SMILES, optional name), CSV/TSV table, or multi-record SDF")
    p.add_argument("--out", required=True, metavar="DIR", help="output folder (store, tables, per-molecule files)")
    p.add_argument("--smiles-column", default=None, metavar="NAME", help="SMILES column of a CSV/TSV (default: smiles/smi)")
    p.add_argument("--name-column", default=None, metavar="NAME", help="name column of a CSV/TSV (default: name/id/title if present)")
    p.add_argument("--workers", type=positive_int, default=None, metavar="N",
                   help="local worker processes, one molecule each at a time (default: one per CPU, divided by --threads)")
    p.add_argument("--scheduler", default=None, metavar="ADDRESS",
                   help="run on an existing Dask cluster (e.g. tcp://head:8786) instead of local workers")
    p.add_argument("--timeout", type=positive_float, default=None, metavar="SECONDS",
                   help="time limit per molecule; a molecule past it gets the status 'timeout'")
    p.add_argument("--resume", action="store_true",
                   help="continue the store in DIR: keep rows whose input and options are unchanged, compute the rest")
    p.add_argument("--retry-failed", action="store_true", help="with --resume, also recompute rows that timed out or crashed")
    p.add_argument("--overwrite", action="store_true", help="replace an existing store in DIR")
    p.add_argument("--tables", default=",".join(TABLE_FORMATS), metavar="FORMATS",
                   help=f"summary table formats, comma-separated: {', '.join(TABLE_FORMATS)} or none (default: both)")
    p.add_argument("--per-molecule", default="none", metavar="FORMATS",
                   help=f"also write DIR/molecules/NNNNN.<fmt> per analysed record: {', '.join(MOLECULE_FORMATS)} (comma-separated)")
    # tests only (documented in DEVELOPERS.md): make the sandbox analysing row INDEX fail in a given way
    p.add_argument("--test-fault", action="append", default=[], metavar="INDEX=KIND", help=argparse.SUPPRESS)
    add_analysis_options(p)


def _faults(items: list[str]) -> dict[int, str]:
    from chairbuild.errors import OptionError

    out = {}
    for item in items:
        index, sep, kind = item.partition("=")
        if not sep or not index.strip().isdigit():
            raise OptionError(f"--test-fault expects INDEX=KIND, got {item!r}")
        out[int(index)] = kind.strip()
    return out


def run_batch_command(args: argparse.Namespace, analysis_kwargs: dict) -> int:
    """Run ``chairbuild batch``; return the exit status."""
    from chairbuild.batch.export import MOLECULE_FORMATS, TABLE_FORMATS, parse_formats, write_molecule_files, write_tables
    from chairbuild.batch.runner import analyze_many
    from chairbuild.errors import OptionError

    if args.retry_failed and not args.resume:
        raise OptionError("--retry-failed applies with --resume")
    tables = parse_formats(args.tables, TABLE_FORMATS, "table")
    per_molecule = parse_formats(args.per_molecule, MOLECULE_FORMATS, "per-molecule")
    progress = bool(analysis_kwargs.pop("progress"))
    run = analyze_many(
        args.input,
        out=args.out,
        workers=args.workers,
        scheduler=args.scheduler,
        timeout=args.timeout,
        resume=args.resume,
        overwrite=args.overwrite,
        retry_failed=args.retry_failed,
        smiles_column=args.smiles_column,
        name_column=args.name_column,
        progress=progress,
        order="completed",
        _test_faults=_faults(args.test_fault),
        **analysis_kwargs,
    )
    n_records = len(run.records)
    if run.scheduler is None:
        where = f"{run.workers} local worker(s)"
    else:
        where = f"the cluster at {run.scheduler}"
    print(f"chairbuild batch: {n_records} record(s) from {args.input}; running on {where}", file=sys.stderr)
    run.run()
    if run.n_skipped:
        print(f"kept {run.n_skipped} row(s) from the earlier run (same input and options)", file=sys.stderr)
    with run.store() as reader:
        written = write_tables(reader, args.out, tables, args.units)
        if per_molecule:
            written += write_molecule_files(reader, args.out, per_molecule, args.units)
    counts = ", ".join(f"{n} {s}" for s, n in sorted(run.counts.items(), key=lambda kv: (kv[0] != "ok", kv[0])))
    print(f"{n_records} row(s): {counts}; computed now {run.n_computed}; store {run.path}", file=sys.stderr)
    for path in written[:6]:
        print(f"wrote {path}", file=sys.stderr)
    if len(written) > 6:
        print(f"wrote {len(written) - 6} more file(s) under {args.out}", file=sys.stderr)
    return 0 if run.n_failed == 0 else EXIT_SOME_FAILED
