"""The chain of levels: syntax, shorthands, windows, the composed ranking formula, failures, cache."""

from __future__ import annotations

import numpy as np
import pytest

from chairbuild.errors import OptionError
from chairbuild.levels.chain import Engine, Operation, make_chain, parse_stage, shorthand_chain
from chairbuild.pipeline import analyze
from chairbuild.result import Status
from tests.helpers import assert_close


def test_stage_syntax_round_trips_and_orders_operations():
    st = parse_stage("GFN2:freq+opt,window=15,solvent=water")
    assert st.engine is Engine.GFN2
    assert st.operations == (Operation.OPTIMISE, Operation.FREQUENCIES)
    assert st.window == 15.0 and st.solvent == "water"
    assert parse_stage(st.spec()) == st


@pytest.mark.parametrize(
    "spec, message",
    [
        ("hf:single-point", "unknown level"),
        ("gfn2:relax", "unknown stage operation"),
        ("gfn2:single-point,window=-1", "window must be positive"),
        ("gfn2:single-point,colour=red", "expected key=value"),
        ("gfn2:single-point,basis=def2-svp", "dft stages only"),
    ],
)
def test_bad_stage_text_is_refused(spec, message):
    with pytest.raises(OptionError, match=message):
        parse_stage(spec)


def test_chain_rules():
    with pytest.raises(OptionError, match="frequencies need geometries optimised at the same level"):
        make_chain(["gfn2:single-point", "gfn2:frequencies"])
    with pytest.raises(OptionError, match="build level"):
        make_chain(["mmff94:optimise"])
    with pytest.raises(OptionError, match="no operation"):
        make_chain(["gfn2"])
    chain = make_chain(["mmff94,window=12", "gfn2:optimise+frequencies", "dft:single-point,window=5"])
    assert chain.build_window == 12.0 and len(chain.stages) == 2
    assert chain.windows(30.0) == (12.0, [40.0, 5.0])
    assert chain.ranking_engine() is Engine.DFT and chain.has_frequencies()
    assert not make_chain(["gfn2:optimise+frequencies", "dft:optimise"]).has_frequencies()


def test_shorthands_are_chains():
    assert shorthand_chain("mmff94", None, False).stages == ()
    assert [s.spec() for s in shorthand_chain("gfn2", None, True).stages] == ["gfn2:optimise+frequencies"]
    assert [s.spec() for s in shorthand_chain("mmff94", "gfn2", True).stages] == ["gfn2:single-point", "mmff94:frequencies"]
    with pytest.raises(OptionError, match="cannot be combined"):
        shorthand_chain("gfn2", "gfn2", False)


def test_radical_needs_an_open_shell_ranking_level():
    from chairbuild import analyze
    from chairbuild.errors import InputError

    # one rule (chairbuild.spin), applied to any chain: MMFF94 ranking refused, a DFT stage accepted
    with pytest.raises(InputError, match="radical"):
        analyze("[CH2]C1CCCCC1", twist_boats=False)
    from chairbuild.pipeline import _open_shell_notes, _options
    from chairbuild.input import read_molecules

    prepared = read_molecules("[CH2]C1CCCCC1")[0]
    notes = _open_shell_notes(prepared, _options({"stages": ["dft:single-point"]}))
    assert any("MMFF94" in n for n in notes)


def test_stages_and_shorthands_do_not_mix():
    with pytest.raises(OptionError, match="stages and the shorthands method, rerank, free_energy do not mix"):
        analyze("CC1CCCCC1", stages=["gfn2:single-point"], free_energy=True)
    with pytest.raises(OptionError, match="valid names: .*water"):
        analyze("CC1CCCCC1", stages=["gfn2:optimise", "dft:single-point,solvent=unobtainium"])


@pytest.fixture(scope="module")
def chained(tmp_path_factory):
    cache = tmp_path_factory.mktemp("cache") / "results.sqlite"
    opts = dict(
        stages=["gfn2:optimise+frequencies,window=8", "dft:single-point"],
        basis="sto-3g",
        threads=1,
        cache=str(cache),
    )
    return analyze("C1CCNCC1", **opts), opts


def test_composed_free_energy_equals_its_parts_on_every_record(chained):
    ens, _ = chained
    dft_key = "B3LYP-D3(BJ)/sto-3g//GFN2-xTB"
    assert ens.ranking == "free_energy"
    assert ens.ranking_formula == f"G = E[{dft_key}] + G_RRHO[GFN2-xTB]"
    assert ens.ranking_terms == (("energies", dft_key), ("thermo", "rrho_correction"))
    assert len(ens.conformers) >= 2
    g = []
    for rec in ens.conformers:
        # every stage the conformer reached keeps its energy
        assert set(rec.energies) == {"MMFF94", "GFN2-xTB", dft_key}
        parts = sum(getattr(rec, mapping)[key] for mapping, key in ens.ranking_terms)
        assert_close(rec.thermo["free_energy"], parts, 1e-9, "G on the record vs E(DFT) + G_RRHO(GFN2-xTB)")
        g.append(parts)
    g = np.array(g)
    assert_close([r.relative_energy for r in ens.conformers], g - g.min(), 1e-9, "relative energies are the composed G")
    stages = ens.provenance["stages"]
    assert stages[0]["kept"] == stages[1]["conformers_in"] == len(ens.conformers)


def test_cache_makes_a_second_run_compute_nothing(chained):
    ens, opts = chained
    again = analyze("C1CCNCC1", **opts)
    assert [s["computed"] for s in again.provenance["stages"]] == [0, 0]
    assert again.provenance["stages"][1]["cached"] == len(ens.conformers)
    assert_close(
        [r.relative_energy for r in again.conformers], [r.relative_energy for r in ens.conformers], 1e-9, "cached rerun"
    )


def test_scf_failure_becomes_a_status_on_the_record(monkeypatch):
    from chairbuild.forcefields import dft

    original = dft.DFTModel.__init__

    def one_cycle(self, *args, **kwargs):
        kwargs["max_scf_cycles"] = 1
        original(self, *args, **kwargs)

    monkeypatch.setattr(dft.DFTModel, "__init__", one_cycle)
    ens = analyze("C1CCOCC1", stages=["mmff94,window=1", "dft:single-point"], basis="sto-3g", threads=1)
    assert len(ens.conformers) == 0
    assert ens.rejected and all(r.status is Status.NOT_CONVERGED for r in ens.rejected)
    assert all("did not converge" in r.message and "MMFF94" in r.energies for r in ens.rejected)


def test_dft_stage_gives_the_same_ranking_with_one_or_two_workers():
    # Hartree-Fock through the DFT stage (no integration grid): one worker runs the tasks in this
    # process, two spread them over worker processes; results must not depend on it
    opts = dict(stages=["mmff94,window=8", "dft:single-point"], functional="hf", basis="sto-3g", dispersion=None,
                twist_boats=False)
    one = analyze("C1CCNCC1", threads=1, **opts)
    two = analyze("C1CCNCC1", threads=2, **opts)
    assert len(one.conformers) >= 2
    assert_close([r.relative_energy for r in two.conformers], [r.relative_energy for r in one.conformers], 1e-6,
                 "relative HF/STO-3G energies, two workers vs one (kJ/mol)")
