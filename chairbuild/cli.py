"""Command line: ``chairbuild analyze INPUT [options]``, ``chairbuild reweight RESULT ENERGIES``,
``chairbuild batch INPUT --out DIR`` and ``chairbuild demo``.

Bad input or options print one message naming the problem and exit with code 2; no
traceback. Output files are checked before any work starts and written atomically.
Exit codes (:data:`EXIT_CODES`, also in ``--help``): 0 done, 1 a computation failed,
2 bad input or option, 130 interrupted (Ctrl-C), 141 the reader of the output closed
the pipe (``| head``). Messages name options as flags (:mod:`chairbuild.optnames`).
"""

from __future__ import annotations

import argparse
import sys
from typing import Sequence

from chairbuild.errors import ChairbuildError

__all__ = ["main", "build_parser"]

EXIT_OK = 0
EXIT_FAILED = 1
EXIT_USAGE = 2
EXIT_INTERRUPTED = 130
EXIT_PIPE_CLOSED = 141

#: Exit code → meaning, printed at the end of ``--help``.
EXIT_CODES = {
    EXIT_OK: "done",
    EXIT_FAILED: "a computation failed (e.g. an SCF or minimisation that did not converge)",
    EXIT_USAGE: "bad input or option (the message names it; nothing was computed or written)",
    EXIT_INTERRUPTED: "interrupted (Ctrl-C); files already written stay complete",
    EXIT_PIPE_CLOSED: "the reader closed the output pipe (e.g. | head)",
}


def _epilog() -> str:
    codes = "\n".join(f"  {code:>3}  {meaning}" for code, meaning in EXIT_CODES.items())
    return "exit codes:\n" + codes


class _Parser(argparse.ArgumentParser):
    def error(self, message: str) -> None:  # argparse's own errors: exit 2, one line
        self.print_usage(sys.stderr)
        self.exit(EXIT_USAGE, f"chairbuild: error: {message}\n")


def _positive_float(text: str) -> float:
    try:
        value = float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"not a number: {text!r}") from None
    if not value > 0:
        raise argparse.ArgumentTypeError(f"must be positive: {text!r}")
    return value


def _positive_int(text: str) -> int:
    try:
        value = int(text)
    except ValueError:
        raise argparse.ArgumentTypeError(f"not an integer: {text!r}") from None
    if value < 1:
        raise argparse.ArgumentTypeError(f"must be at least 1: {text!r}")
    return value


def _add_analysis_options(p: argparse.ArgumentParser) -> None:
    p.add_argument("-T", "--temperature", type=_positive_float, default=298.15, help="temperature in K (default 298.15)")
    p.add_argument(
        "--window",
        type=_positive_float,
        default=None,
        help="keep conformers within this energy of the lowest, in --units (default 30 kJ/mol)",
    )
    p.add_argument("--units", choices=["kj", "kcal"], default="kj", help="energy unit of all output (default kj)")
    p.add_argument("--forcefield", choices=["mmff94", "mmff94s"], default="mmff94", help="MMFF variant (default mmff94)")
    p.add_argument(
        "--method",
        choices=["mmff94", "gfn2"],
        default="mmff94",
        help="final level: mmff94 (default, fast) or gfn2 (re-optimise the MMFF ensemble with GFN2-xTB); "
        "shorthand for --stage gfn2:optimise",
    )
    p.add_argument(
        "--rerank",
        choices=["gfn2"],
        default=None,
        help="GFN2-xTB single points at the MMFF geometries; shorthand for --stage gfn2:single-point",
    )
    p.add_argument(
        "--solvent",
        default=None,
        help="implicit solvent of the gfn2 and dft levels (ALPB/GBSA names for GFN2-xTB, e.g. water, chloroform; "
        "an unknown name lists the valid ones)",
    )
    p.add_argument("--solvation", choices=["alpb", "gbsa"], default="alpb", help="GFN2-xTB solvation model for --solvent (default alpb)")
    p.add_argument(
        "--free-energy",
        action="store_true",
        help="rank and weight by the qRRHO free energy G instead of E (shorthand: adds frequencies to the last level)",
    )
    _add_chain_options(p)
    p.add_argument("--no-twist-boats", action="store_true", help="build chairs only")
    p.add_argument(
        "--max-rotamers",
        type=_positive_int,
        default=None,
        help="cap on rotamer combinations per all-chair ring state (default: automatic, 729 for one ring down to 81 "
        "for ring systems with many ring-state and N-inversion combinations)",
    )
    p.add_argument(
        "--reduced-search",
        action="store_true",
        help="search a molecule beyond the size cap (over 100 heavy atoms or 30 rotatable bonds) with only the "
        "rotors nearest the rings enumerated, instead of refusing it",
    )
    p.add_argument("--threads", type=_positive_int, default=None, help="CPU threads for the energy engines")
    p.add_argument("--quiet", action="store_true", help="no progress bars and no 'wrote FILE' lines (errors still print)")


def _add_chain_options(p: argparse.ArgumentParser) -> None:
    from chairbuild.levels.chain import (
        DEFAULT_DFT_BASIS,
        DEFAULT_DFT_DISPERSION,
        DEFAULT_DFT_FUNCTIONAL,
        DEFAULT_DFT_SOLVATION,
    )

    g = p.add_argument_group(
        "chain of levels after the MMFF94 build (replaces --method, --rerank and --free-energy; see README)"
    )
    g.add_argument(
        "--stage",
        action="append",
        default=None,
        metavar="SPEC",
        help="one stage, ENGINE:OPERATION[+OPERATION][,key=value...]: engines mmff94, gfn2, dft; operations "
        "single-point, optimise, frequencies; keys window (kJ/mol), solvent, solvation, functional, basis, dispersion; "
        "e.g. --stage gfn2:optimise+frequencies,window=8 --stage dft:single-point; repeatable, run in the order given",
    )
    g.add_argument(
        "--functional",
        default=None,
        metavar="NAME",
        help=f"exchange-correlation functional of the dft stages, a PySCF/libxc name (default {DEFAULT_DFT_FUNCTIONAL})",
    )
    g.add_argument(
        "--basis", default=None, metavar="NAME", help=f"orbital basis of the dft stages, a PySCF name (default {DEFAULT_DFT_BASIS})"
    )
    g.add_argument(
        "--dispersion",
        choices=["d3bj", "none"],
        default=None,
        help=f"dispersion correction of the dft stages (default {DEFAULT_DFT_DISPERSION})",
    )
    g.add_argument(
        "--dft-solvation",
        choices=["cpcm", "iefpcm", "smd"],
        default=None,
        help=f"implicit-solvent model of the dft stages with --solvent (default {DEFAULT_DFT_SOLVATION})",
    )
    g.add_argument(
        "--cache",
        default=None,
        metavar="PATH",
        help="results cache file (SQLite, created when missing): finished single points, optimisations and Hessians "
        "are stored as they arrive and reused by a later run",
    )


def _add_coupling_options(p: argparse.ArgumentParser) -> None:
    g = p.add_argument_group("vicinal couplings 3J(H,H) (see chairbuild.couplings)")
    g.add_argument("--couplings", action="store_true", help="print the coupling table: pair, limiting J per family, ensemble <J>")
    g.add_argument("--couplings-csv", metavar="PATH", default=None, help="write the coupling table as CSV (one row per pair and family)")
    g.add_argument(
        "--fit-couplings",
        metavar="CSV",
        default=None,
        help="fit family populations to measured couplings (CSV: proton_a,proton_b,J_Hz[,uncertainty_Hz])",
    )
    g.add_argument(
        "--fit-model",
        choices=["both", "two-state", "multi-state"],
        default="both",
        help="population model of --fit-couplings (default both)",
    )


def _add_reweight_parser(sub) -> None:
    from chairbuild.levels.external import DEFAULT_LEVEL_NAME, DEFAULT_MAX_RMSD_A, EnergyTerm

    rw = sub.add_parser(
        "reweight",
        help="re-rank a saved JSON result with energies computed elsewhere (CSV file, or output files read with cclib)",
        description="Re-rank the conformers of a saved result (the JSON of chairbuild analyze -o result.json) with "
        "energies you computed elsewhere, and write the same tables, files and report at your level. The saved "
        "file is not changed; the new result keeps every level's energies.",
        epilog=_epilog(),
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    rw.add_argument("result", help="JSON result written by chairbuild analyze (-o result.json or --json)")
    rw.add_argument(
        "energies",
        help="a CSV file with the columns conformer,energy,unit (conformer: id or exported file name such as "
        "rank_001.xyz; unit: hartree, eV, kJ/mol or kcal/mol), or a folder of output files that cclib reads, each "
        "named like its exported conformer (rank_001.out, rank_001.cjson, ...)",
    )
    rw.add_argument(
        "--record", type=_positive_int, default=None, help="1-based result of a JSON file holding several (one per diastereomer)"
    )
    rw.add_argument(
        "--energy-term",
        choices=[t.value for t in EnergyTerm],
        default=EnergyTerm.AUTO.value,
        help="which energy of the output files ranks: electronic (the last SCF energy), electronic+dispersion (plus a "
        "dispersion correction reported apart), mp, cc, free-energy, or auto (the first of free-energy, cc, mp, "
        "electronic that every file has; default); for a CSV, what its numbers are (auto: electronic)",
    )
    rw.add_argument(
        "--level-name",
        default=None,
        metavar="NAME",
        help=f"name of your level in the result (default: from the files when they all name it, else {DEFAULT_LEVEL_NAME!r})",
    )
    rw.add_argument(
        "--max-rmsd",
        type=_positive_float,
        default=DEFAULT_MAX_RMSD_A,
        metavar="A",
        help=f"largest RMSD in Å between a file's geometry and its conformer after superposition (default {DEFAULT_MAX_RMSD_A:g})",
    )
    rw.add_argument(
        "--add-thermal-correction",
        action="store_true",
        help="add the saved result's thermal correction G_RRHO to your energies (the saved result must have frequencies)",
    )
    rw.add_argument(
        "--window",
        type=_positive_float,
        default=None,
        help="keep conformers within this energy of the lowest, in --units (default: the saved result's window)",
    )
    rw.add_argument("--units", choices=["kj", "kcal"], default="kj", help="energy unit of all output (default kj)")
    rw.add_argument("--json", action="store_true", help="print the JSON result to stdout instead of the table")
    rw.add_argument(
        "-o", "--output", action="append", default=[], metavar="PATH",
        help="write results; format by extension (.sdf .xyz .csv .json) or a directory (one XYZ per conformer); repeatable",
    )
    rw.add_argument("--report", metavar="PATH", default=None, help="write a self-contained HTML report")
    rw.add_argument("--overwrite", action="store_true", help="replace the rank_*.xyz files of an earlier run in an -o directory")
    rw.add_argument("--quiet", action="store_true", help="no 'wrote FILE' lines (errors still print)")


def build_parser() -> argparse.ArgumentParser:
    """The argument parser (exposed for the documentation and tests)."""
    from chairbuild import __version__

    parser = _Parser(
        prog="chairbuild",
        description="Build every chair and twist-boat of a molecule's six-membered rings, minimise them, "
        "and report populations, axial/equatorial positions and the additive estimate.",
        epilog=_epilog(),
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    parser.add_argument("--version", action="version", version=f"chairbuild {__version__}")
    sub = parser.add_subparsers(dest="command", required=True, parser_class=_Parser)
    an = sub.add_parser(
        "analyze",
        help="analyse one molecule (SMILES, SDF/MOL file, or .smi/.txt file of SMILES lines)",
        epilog=_epilog() + "\n\natom numbers in the table are 0-based (as in the JSON and RDKit)",
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    an.add_argument("molecule", help="SMILES string, path of an SDF/MOL file, or a .smi/.txt file (one SMILES per line)")
    an.add_argument(
        "--record", type=_positive_int, default=None, help="1-based record of a multi-record SDF or line of a .smi/.txt file"
    )
    an.add_argument("--name", default=None, help="name used in the output")
    an.add_argument("--enumerate-stereo", action="store_true", help="analyse every diastereomer when stereo is undefined")
    an.add_argument("--json", action="store_true", help="print the JSON result to stdout instead of the table")
    an.add_argument(
        "-o",
        "--output",
        action="append",
        default=[],
        metavar="PATH",
        help="write results; format by extension (.sdf .xyz .csv .json) or a directory (one XYZ per conformer); repeatable",
    )
    an.add_argument("--report", metavar="PATH", default=None, help="write a self-contained HTML report (tables, plots, 3D viewer)")
    an.add_argument(
        "--overwrite", action="store_true", help="replace the rank_*.xyz files of an earlier run in an -o directory"
    )
    _add_coupling_options(an)
    _add_analysis_options(an)
    _add_reweight_parser(sub)
    from chairbuild.batch.cli import add_batch_parser

    add_batch_parser(sub, _add_analysis_options, _positive_int, _positive_float)
    demo = sub.add_parser("demo", help="run the built-in demonstration scenario")
    demo.add_argument("--output-dir", default="demo-output", help="where the demo writes its files (default demo-output)")
    demo.add_argument("--quiet", action="store_true", help="no progress bars and no 'wrote FILE' lines")
    return parser


def _analysis_kwargs(args: argparse.Namespace) -> dict:
    from chairbuild.result import EnergyUnit

    unit = EnergyUnit.parse(args.units)
    kwargs = {
        "temperature": args.temperature,
        "forcefield": args.forcefield,
        "method": args.method,
        "rerank": args.rerank,
        "solvent": args.solvent,
        "solvation_model": args.solvation,
        "free_energy": args.free_energy,
        "twist_boats": not args.no_twist_boats,
        "max_rotamers": args.max_rotamers,
        "reduced_search": args.reduced_search,
        "threads": args.threads,
        "progress": not args.quiet and sys.stderr.isatty(),
    }
    if args.window is not None:
        kwargs["window"] = unit.to_kj(args.window)
    if args.stage is not None:
        kwargs["stages"] = list(args.stage)
    for flag, key in (
        ("functional", "functional"),
        ("basis", "basis"),
        ("dispersion", "dispersion"),
        ("dft_solvation", "dft_solvation_model"),
        ("cache", "cache"),
    ):
        if getattr(args, flag) is not None:
            kwargs[key] = getattr(args, flag)
    return kwargs


def _say(args: argparse.Namespace, text: str) -> None:
    """A progress line on stderr ("wrote FILE"), silenced by --quiet."""
    if not args.quiet:
        print(text, file=sys.stderr)


def _run_analyze(args: argparse.Namespace) -> int:
    import json

    from chairbuild.output import format_table
    from chairbuild.pipeline import analyze_all
    from chairbuild.result import EnergyUnit

    unit = EnergyUnit.parse(args.units)
    _check_result_targets(args)
    measurements = _check_coupling_options(args)
    if args.cache:
        from chairbuild.levels.cache import check_cache_path

        check_cache_path(args.cache)  # an unusable cache path is refused before any work, nothing created
    ensembles = analyze_all(
        args.molecule,
        name=args.name,
        record=args.record,
        enumerate_stereo=args.enumerate_stereo,
        **_analysis_kwargs(args),
    )
    _write_results(args, ensembles, unit)
    fits = _write_couplings(args, ensembles, measurements)
    if args.json:
        dicts = [e.to_dict(unit) for e in ensembles]
        for d, f in zip(dicts, fits):
            if f:
                d["coupling_fits"] = [fit.to_dict() for fit in f]
        payload = dicts[0] if len(dicts) == 1 else dicts
        print(json.dumps(payload, indent=2, allow_nan=False))
    else:
        print("\n\n".join(format_table(e, unit) for e in ensembles))
        if args.couplings or measurements:
            from chairbuild.couplings.tables import couplings_text

            for ens, f in zip(ensembles, fits):
                print("\n" + couplings_text(ens))
                for fit in f:
                    print("\n" + fit.format())
    sys.stdout.flush()
    return EXIT_OK


def _run_reweight(args: argparse.Namespace) -> int:
    import json

    from chairbuild.errors import OptionError
    from chairbuild.levels.external import reweight
    from chairbuild.optnames import spell
    from chairbuild.output import format_table
    from chairbuild.result import EnergyUnit, load_json_all

    unit = EnergyUnit.parse(args.units)
    _check_result_targets(args)
    saved = load_json_all(args.result)
    if args.record is None and len(saved) > 1:
        raise OptionError(f"{args.result!r} holds {len(saved)} results (one per diastereomer); choose one with {spell('record')} N")
    if args.record is not None and args.record > len(saved):
        raise OptionError(f"{spell('record', args.record)}: {args.result!r} holds {len(saved)} result(s)")
    ensemble = reweight(
        saved[(args.record or 1) - 1],
        args.energies,
        energy_term=args.energy_term,
        level_name=args.level_name,
        max_rmsd=args.max_rmsd,
        add_thermal_correction=args.add_thermal_correction,
        window=None if args.window is None else unit.to_kj(args.window),
    )
    _write_results(args, [ensemble], unit)
    if args.json:
        print(json.dumps(ensemble.to_dict(unit), indent=2, allow_nan=False))
    else:
        print(format_table(ensemble, unit))
    sys.stdout.flush()
    return EXIT_OK


def _check_result_targets(args: argparse.Namespace) -> None:
    """Refuse unusable -o and --report paths before any work."""
    from chairbuild.output import check_target

    for target in args.output:
        check_target(target, args.overwrite)
    if args.report:
        from chairbuild.report import check_report_path

        check_report_path(args.report)


def _write_results(args: argparse.Namespace, ensembles, unit) -> None:
    """Write the -o files and the --report of ``ensembles``."""
    from chairbuild.output import write_many

    for target in args.output:
        for path in write_many(ensembles, target, unit, args.overwrite):
            _say(args, f"wrote {path}")
    if args.report:
        from chairbuild.report import write_report

        _say(args, f"wrote {write_report(ensembles, args.report)}")


def _silence_stdout() -> None:
    """After a closed pipe: point stdout at /dev/null so that the interpreter's final flush is quiet."""
    import os

    try:
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
    except (OSError, ValueError):
        pass


def _check_coupling_options(args: argparse.Namespace):
    """Check the coupling outputs and read the measured couplings before any work starts."""
    if args.couplings_csv:
        from pathlib import Path

        from chairbuild.errors import OptionError
        from chairbuild.output import check_target

        if Path(args.couplings_csv).suffix.lower() != ".csv":
            raise OptionError(f"--couplings-csv writes CSV; give a path ending in .csv, got {args.couplings_csv!r}")
        check_target(args.couplings_csv)
    if not args.fit_couplings:
        return None
    from chairbuild.couplings.fit import read_measurements

    return read_measurements(args.fit_couplings)


def _write_couplings(args: argparse.Namespace, ensembles, measurements) -> list[list]:
    """Write the coupling CSV and run the fits; returns the fits of each ensemble."""
    from pathlib import Path

    if args.couplings_csv:
        from chairbuild.couplings.tables import couplings_csv_text
        from chairbuild.output import _atomic_write

        for k, ens in enumerate(ensembles, start=1):
            path = Path(args.couplings_csv)
            if len(ensembles) > 1:
                path = path.with_name(f"{path.stem}_isomer{k}{path.suffix}")
            _atomic_write(path, couplings_csv_text(ens))
            _say(args, f"wrote {path}")
    if not measurements:
        return [[] for _ in ensembles]
    from chairbuild.couplings.fit import fit_couplings

    models = ["two-state", "multi-state"] if args.fit_model == "both" else [args.fit_model]
    return [[fit_couplings(ens, measurements, model=m) for m in models] for ens in ensembles]


def main(argv: Sequence[str] | None = None) -> int:
    """Entry point of the ``chairbuild`` command; returns the exit code (see :data:`EXIT_CODES`)."""
    from chairbuild.errors import ConvergenceError
    from chairbuild.optnames import command_line

    try:
        parser = build_parser()
        args = parser.parse_args(argv)
        with command_line():
            if args.command == "analyze":
                return _run_analyze(args)
            if args.command == "reweight":
                return _run_reweight(args)
            if args.command == "batch":
                from chairbuild.batch.cli import run_batch_command

                return run_batch_command(args, _analysis_kwargs(args))
            if args.command == "demo":
                from chairbuild.demo import run_demo

                return run_demo(args.output_dir, progress=not args.quiet and sys.stderr.isatty(), quiet=args.quiet)
    except ConvergenceError as exc:
        print(f"chairbuild: computation failed: {exc}", file=sys.stderr)
        return EXIT_FAILED
    except ChairbuildError as exc:
        print(f"chairbuild: error: {exc}", file=sys.stderr)
        return EXIT_USAGE
    except KeyboardInterrupt:
        print("chairbuild: interrupted", file=sys.stderr)
        return EXIT_INTERRUPTED
    except BrokenPipeError:
        _silence_stdout()
        return EXIT_PIPE_CLOSED
    return EXIT_USAGE
