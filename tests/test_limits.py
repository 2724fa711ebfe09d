"""The size of the systematic search: exact rotamer counts, bounded memory, the size cap and the reduced search.

Check values are exact arithmetic (3^n rotamer combinations of n staggered sp3-sp3 rotors;
common practice, no source) and the limits documented in chairbuild.limits.
"""

from __future__ import annotations

import subprocess
import sys
import textwrap

import pytest

from chairbuild.errors import InputError
from chairbuild.input import read_molecules
from chairbuild.limits import MAX_HEAVY_ATOMS, MAX_ROTORS, check_search_size, count_rotamers, format_count
from chairbuild.rings import analyse_rings


def _peg(units: int) -> str:
    """cis-4-substituted cyclohexanol carrying an oligo(ethylene glycol) chain of ``units`` units."""
    return "O[C@H]1CC[C@H](CC1)" + "OCC" * units + "O"


def test_rotamer_count_is_exact_beyond_64_bits():
    rotors = analyse_rings(read_molecules(_peg(14))[0].mol).rotors
    n3 = sum(len(r.angles) == 3 for r in rotors)
    assert len(rotors) >= 41 and n3 == len(rotors)
    assert count_rotamers(rotors) == 3 ** len(rotors)  # exceeds 2^63 from 40 rotors on
    assert format_count(3**44) == "about 9.8e+20"
    assert format_count(729) == "729"


def test_build_of_a_40_rotor_molecule_stays_within_memory():
    # before the count was exact, 3^40 wrapped around in a 64-bit product, the cap was skipped and
    # the full product (about 1.2e19 combinations) was materialised; here under a 3 GiB address-space limit
    code = textwrap.dedent(
        f"""
        import resource
        resource.setrlimit(resource.RLIMIT_AS, (3 * 1024**3, 3 * 1024**3))
        from chairbuild.build import build_starting_structures
        from chairbuild.input import read_molecules
        from chairbuild.rings import analyse_rings
        p = read_molecules({_peg(14)!r})[0]
        a = analyse_rings(p.mol)
        assert len(a.rotors) >= 41
        r = build_starting_structures(p.mol, a, p.smiles, p.achiral, max_rotamers=9, include_twist_boats=False)
        print(len(r.starts), r.capped, r.notes[0])
        """
    )
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, timeout=300)
    assert out.returncode == 0, out.stderr[-2000:]
    n_starts, capped, note = out.stdout.split(" ", 2)
    assert capped == "True" and "rotamer cap reached: about" in note
    assert 0 < int(n_starts) <= 2 * 9 * 4  # two chairs x 9 rotamers x at most 4 placements


def test_size_cap_refuses_with_the_option_to_use():
    rotors = analyse_rings(read_molecules(_peg(10))[0].mol).rotors
    assert len(rotors) > MAX_ROTORS
    with pytest.raises(InputError, match=r"rotatable bonds outside the rings \(cap 30\).*reduced_search=True"):
        check_search_size(35, rotors, reduced_search=False)
    with pytest.raises(InputError, match=rf"{MAX_HEAVY_ATOMS + 1} heavy atoms \(cap {MAX_HEAVY_ATOMS}\)"):
        check_search_size(MAX_HEAVY_ATOMS + 1, rotors[:3], reduced_search=False)
    assert check_search_size(MAX_HEAVY_ATOMS, rotors[:MAX_ROTORS], reduced_search=False) == ()
    (note,) = check_search_size(35, rotors, reduced_search=True)
    assert note.startswith("reduced search:") and "partial estimate" in note


def test_analyze_refuses_beyond_the_cap_before_any_work():
    from chairbuild.pipeline import analyze

    with pytest.raises(InputError, match="reduced_search=True"):
        analyze(_peg(10))


def test_cli_size_cap_exit_code_2_names_the_flag(capsys):
    from chairbuild.cli import main

    code = main(["analyze", _peg(10)])
    err = capsys.readouterr().err
    assert code == 2
    assert "--reduced-search" in err and "Traceback" not in err


def test_reduced_search_runs_with_a_note_and_no_refinement():
    from chairbuild.pipeline import analyze

    ens = analyze(_peg(10), reduced_search=True, max_rotamers=9, twist_boats=False, threads=1)
    assert any(n.startswith("reduced search:") for n in ens.notes)
    counts = ens.provenance["counts"]
    assert counts["minimisations"] == counts["starting_structures"]  # no refinement pass
    assert len(ens.conformers) > 0
    # cis-1,4: one chair has the OH (atom 0) axial, the other the chain's ether O (atom 7)
    assert {f.key for f in ens.families} == {"ring0:chair[ax:0]", "ring0:chair[ax:7]"}
