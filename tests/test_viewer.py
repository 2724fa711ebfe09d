"""Tests of chairbuild.viewer: scene labels against the result object, hydrogen selection,
alignment of the overlay on the ring atoms, and the py3Dmol view.

Check values are internal-consistency checks (common practice, no source): the labels
must carry the same atoms and flags as the Ensemble, the syn-1,3 hydrogens are checked
against an independent geometric construction, and the overlay RMSD against an
independent Kabsch fit.
"""

from __future__ import annotations

import base64
import dataclasses
import gzip
import json
import re

import numpy as np
import pytest

from chairbuild.errors import InputError, OptionError
from chairbuild.result import Position, RingShape
from chairbuild.viewer import (
    POSITION_COLOURS,
    POSITION_TEXT,
    SYN_AXIAL_H_COLOUR,
    ConformerBrowser,
    HydrogenMode,
    LabelKind,
    aligned_ensemble,
    compose,
    kabsch_rmsd,
    legend_entries,
    relevant_hydrogens,
    scene_calls,
    scene_labels,
    scene_layers,
    view,
)

# cis-1-tert-butyl-4-methylcyclohexane: the locked chair puts the methyl axial.
TBU_METHYL = "CC(C)(C)[C@H]1CC[C@@H](C)CC1"
# trans-2-methyldecalin, methyl equatorial in the lowest chair-chair (two rings, fused).
METHYLDECALIN = "C[C@H]1CC[C@H]2CCCC[C@@H]2C1"


@pytest.fixture(scope="module")
def locked():
    from chairbuild.pipeline import analyze

    return analyze(TBU_METHYL, name="tBu-locked methylcyclohexane")


@pytest.fixture(scope="module")
def fused():
    from chairbuild.pipeline import analyze

    return analyze(METHYLDECALIN, name="2-methyldecalin")


FAKE_JS = "/* stand-in for the 3Dmol.js build */ var $3Dmol = undefined;"


@pytest.fixture
def fake_asset(tmp_path, monkeypatch):
    import chairbuild.assets as assets

    folder = tmp_path / "assets"
    folder.mkdir()
    (folder / assets.JS_NAME).write_text(FAKE_JS, encoding="utf-8")
    (folder / "3Dmol-version.json").write_text(json.dumps({"version": assets.THREEDMOL_VERSION}), encoding="utf-8")
    monkeypatch.setattr(assets, "ASSET_DIR", folder)
    return folder


def _bonded_h(ens, atom: int) -> list[int]:
    from rdkit import Chem

    mol = Chem.MolFromMolBlock(ens.mol_block, removeHs=False)
    return [n.GetIdx() for n in mol.GetAtomWithIdx(atom).GetNeighbors() if n.GetSymbol() == "H"]


# ----------------------------------------------------------------------------- labels
@pytest.mark.parametrize("which", ["locked", "fused"])
def test_position_labels_match_result_substituents(which, request):
    ens = request.getfixturevalue(which)
    assert len(ens.conformers) >= 2
    for k, rec in enumerate(ens.conformers):
        labels = [lab for lab in scene_labels(ens, k) if lab.kind is LabelKind.POSITION]
        got = sorted((lab.atom, lab.ring_atom, lab.ring_index, lab.position) for lab in labels)
        want = sorted((s.atom, s.ring_atom, s.ring_index, s.position) for s in rec.substituents)
        assert got == want
        for lab in labels:
            assert lab.colour == POSITION_COLOURS[lab.position]
            assert POSITION_TEXT[lab.position] in lab.text.split()
            # the one spelling of a substituent in every output (SubstituentDescriptor.label)
            sub = next(s for s in rec.substituents if s.atom == lab.atom)
            assert lab.text.startswith(f"{ens.symbols[lab.atom]}{lab.atom}({sub.group}) ")


def test_locked_chair_labels_methyl_axial_and_tert_butyl_equatorial(locked):
    rec = locked.conformers[0]
    assert rec.rings[0].shape is RingShape.CHAIR
    by_group = {s.group: s.position for s in rec.substituents}
    assert by_group["C(C)(C)C"] is Position.EQUATORIAL
    assert by_group["C"] is Position.AXIAL
    texts = {lab.atom: lab.text for lab in scene_labels(locked, 0)}
    methyl = next(s.atom for s in rec.substituents if s.group == "C")
    assert texts[methyl].endswith(" ax")


def test_torsion_labels_carry_the_ring_torsions(fused):
    for k, rec in enumerate(fused.conformers):
        tors = [lab for lab in scene_labels(fused, k, torsion_labels=True) if lab.kind is LabelKind.TORSION]
        assert len(tors) == 6 * len(rec.rings)
        for r, ring in enumerate(rec.rings):
            values = [lab.value for lab in tors if lab.ring_index == r]
            np.testing.assert_allclose(values, ring.torsions)
            for lab, angle in zip([t for t in tors if t.ring_index == r], ring.torsions):
                assert lab.text == f"{angle:+.0f}°"
                assert lab.atoms[1:3] in {tuple(ring.atoms[i : i + 2]) for i in range(5)} | {(ring.atoms[5], ring.atoms[0])}
    assert not any(lab.kind is LabelKind.TORSION for lab in scene_labels(fused, 0))


def test_label_anchor_sits_just_beyond_the_substituent_atom(locked):
    aligned = aligned_ensemble(locked)
    xyz = aligned.conformers[0].coords
    for lab in scene_labels(aligned, 0):
        d = np.linalg.norm(np.array(lab.xyz) - xyz[lab.atom])
        assert 0.2 < d < 0.5


def test_legend_lists_exactly_the_positions_present(locked):
    labels = scene_labels(locked, 0)
    entries = legend_entries(labels, syn_axial_hydrogens=False)
    assert {e.text for e in entries} == {POSITION_TEXT[lab.position] for lab in labels}
    assert len(legend_entries(complete=True)) == len(Position) + 2


# --------------------------------------------------------------------------- hydrogens
def test_relevant_hydrogens_are_the_syn_axial_pair(locked):
    from chairbuild.describe import mean_plane_normal

    rec = locked.conformers[0]
    axial = [s for s in rec.substituents if s.position is Position.AXIAL]
    assert len(axial) == 1
    sub = axial[0]
    ring = list(locked.ring_atoms[sub.ring_index])
    i = ring.index(sub.ring_atom)
    partners = [ring[(i + 2) % 6], ring[(i - 2) % 6]]
    xyz = rec.coords
    normal = mean_plane_normal(xyz[ring])
    side = np.dot(xyz[sub.atom] - xyz[sub.ring_atom], normal)
    # Independent construction: on each partner, the H pointing most along the substituent's side.
    expected = []
    for p in partners:
        hs = _bonded_h(locked, p)
        assert len(hs) == 2
        expected.append(max(hs, key=lambda h: np.sign(side) * np.dot(xyz[h] - xyz[p], normal)))
    got = relevant_hydrogens(locked, 0)
    assert sorted(got) == sorted(expected)
    for h in got:
        bond = xyz[h] - xyz[[p for p in partners if h in _bonded_h(locked, p)][0]]
        assert abs(np.dot(bond, normal)) / np.linalg.norm(bond) > 0.9


def test_no_relevant_hydrogens_without_an_axial_substituent_in_a_chair(locked, fused):
    for ens in (locked, fused):
        for k, rec in enumerate(ens.conformers):
            chair_axial = any(
                s.position is Position.AXIAL and rec.rings[s.ring_index].shape is RingShape.CHAIR for s in rec.substituents
            )
            if not chair_axial:
                assert relevant_hydrogens(ens, k) == ()
            else:
                assert len(relevant_hydrogens(ens, k)) >= 1


def _styles(calls):
    return [args for name, args in calls if name == "setStyle"]


def test_hydrogen_modes_in_the_scene(locked):
    relevant = list(relevant_hydrogens(locked, 0))
    all_h = [i for i, s in enumerate(locked.symbols) if s == "H"]
    rel = _styles(scene_calls(locked, 0, show_hydrogens="relevant"))
    assert [{"model": 0, "index": all_h}, {}] in rel
    marked = [a for a in rel if a[1].get("sphere", {}).get("color") == SYN_AXIAL_H_COLOUR]
    assert len(marked) == 1 and marked[0][0]["index"] == relevant
    everything = _styles(scene_calls(locked, 0, show_hydrogens=HydrogenMode.ALL))
    assert not any(a[1] == {} for a in everything)
    none = _styles(scene_calls(locked, 0, show_hydrogens="none"))
    assert [{"model": 0, "index": all_h}, {}] in none
    assert not any("sphere" in a[1] for a in none)


def test_bad_options_raise_typed_errors(locked):
    with pytest.raises(OptionError):
        scene_labels(locked, len(locked.conformers))
    with pytest.raises(OptionError):
        scene_calls(locked, 0, show_hydrogens="some")
    with pytest.raises(OptionError):
        view(locked, width=0)
    with pytest.raises(InputError):
        scene_labels("not an ensemble", 0)
    with pytest.raises(OptionError):
        ConformerBrowser(locked, colour="red")


# --------------------------------------------------------------------------- alignment
def _rotation(seed: int) -> np.ndarray:
    rng = np.random.default_rng(seed)
    q, r = np.linalg.qr(rng.normal(size=(3, 3)))
    q = q * np.sign(np.diag(r))
    if np.linalg.det(q) < 0:
        q[:, 0] = -q[:, 0]
    return q


def test_overlay_alignment_superposes_ring_atoms(fused):
    ring_atoms = sorted({a for ring in fused.ring_atoms for a in ring})
    ref = fused.conformers[0].coords
    # Scatter copies of the lowest conformer in space: alignment must bring the rings back.
    scattered = tuple(
        dataclasses.replace(rec, coords=ref @ _rotation(k).T + np.array([3.0 * k, -2.0, 5.0]))
        for k, rec in enumerate(fused.conformers)
    )
    moved = dataclasses.replace(fused, conformers=scattered)
    before = [np.sqrt(((c.coords[ring_atoms] - scattered[0].coords[ring_atoms]) ** 2).sum(1).mean()) for c in scattered[1:]]
    assert min(before) > 1.0
    aligned = aligned_ensemble(moved)
    base = aligned.conformers[0].coords[ring_atoms]
    for rec in aligned.conformers[1:]:
        rmsd = np.sqrt(((rec.coords[ring_atoms] - base) ** 2).sum(1).mean())
        assert rmsd < 1e-6


def test_overlay_alignment_reaches_the_optimal_fit_for_real_conformers(fused):
    ring_atoms = sorted({a for ring in fused.ring_atoms for a in ring})
    aligned = aligned_ensemble(fused)
    base = aligned.conformers[0].coords[ring_atoms]
    for orig, rec in zip(fused.conformers, aligned.conformers):
        direct = np.sqrt(((rec.coords[ring_atoms] - base) ** 2).sum(1).mean())
        optimal = kabsch_rmsd(orig.coords[ring_atoms], fused.conformers[0].coords[ring_atoms])
        assert direct == pytest.approx(optimal, abs=1e-6)
        # a rigid motion: every interatomic distance is kept
        d0 = np.linalg.norm(orig.coords[:, None] - orig.coords[None], axis=-1)
        d1 = np.linalg.norm(rec.coords[:, None] - rec.coords[None], axis=-1)
        np.testing.assert_allclose(d0, d1, atol=1e-8)
    assert aligned.conformers[0].coords[ring_atoms].mean(axis=0) == pytest.approx(np.zeros(3), abs=1e-9)
    # the input ensemble is untouched
    assert not np.allclose(fused.conformers[0].coords, aligned.conformers[0].coords)


# --------------------------------------------------------------------------------- view
def test_view_builds_from_the_exported_sdf(locked):
    import py3Dmol

    from chairbuild.output import sdf_text

    v = view(locked, 0, torsion_labels=True, width=500, height=400)
    assert isinstance(v, py3Dmol.view)
    js = v.startjs
    record = sdf_text(aligned_ensemble(locked)).split("$$$$\n")[0].lstrip("\n") + "$$$$\n"
    assert json.dumps(record) in js
    for lab in scene_labels(aligned_ensemble(locked), 0, torsion_labels=True):
        assert json.dumps(lab.text) in js
    assert "population" in js and "kJ/mol" in js


def test_view_inlines_the_bundled_script_and_needs_no_network(locked, fake_asset):
    html = view(locked, 0).write_html()
    assert not re.search(r"https?://", html)
    payload = re.search(r'atob\("([A-Za-z0-9+/=]+)"\)', html)
    assert payload is not None
    assert gzip.decompress(base64.b64decode(payload.group(1))).decode("utf-8") == FAKE_JS
    assert "chairbuild-inline-3dmol" not in html  # py3Dmol's loader call was replaced


def test_view_with_another_py3dmol_template_uses_a_data_url(locked, fake_asset, monkeypatch):
    import py3Dmol

    class OtherTemplate(py3Dmol.view):
        def __init__(self, *args, **kwargs):
            super().__init__(*args, **kwargs)
            self.startjs = self.startjs.replace("loadScriptAsync(", "loadScriptLater(")

    monkeypatch.setattr(py3Dmol, "view", OtherTemplate)
    html = view(locked, 0).write_html()
    assert not re.search(r"https?://", html)
    url = re.search(r"'data:text/javascript;base64,([A-Za-z0-9+/=]+)'", html)
    assert url is not None
    assert base64.b64decode(url.group(1)).decode("utf-8") == FAKE_JS


def test_view_without_the_asset_warns_and_loads_the_pinned_cdn_build(locked, tmp_path, monkeypatch):
    import chairbuild.assets as assets

    monkeypatch.setattr(assets, "ASSET_DIR", tmp_path / "missing")
    with pytest.warns(UserWarning, match="not bundled"):
        v = view(locked, 0)
    assert f"loadScriptAsync('{assets.cdn_url()}')" in v.startjs
    assert "3dmol@2.5.5" in v.startjs


def test_overlay_view_has_every_conformer_and_one_labelled(locked):
    calls = scene_calls(locked, 1, overlay=True)
    models = [a for n, a in calls if n == "addModel"]
    assert len(models) == len(locked.conformers)
    position_labels = [a for n, a in calls if n == "addLabel" and not a[1].get("useScreen")]
    assert len(position_labels) == len(locked.conformers[1].substituents)
    assert calls[-1] == ("zoomTo", [{"model": 1}])


def test_compose_matches_scene_calls(locked):
    layers = scene_layers(locked, 0)
    for mode in HydrogenMode:
        for tors in (False, True):
            calls = scene_calls(locked, 0, show_hydrogens=mode, torsion_labels=tors)
            assert [c for c in calls if c[0] != "addModel"] == compose(layers, mode, tors)


def test_browser_steps_in_energy_order_and_wraps(locked):
    browser = ConformerBrowser(locked, show_hydrogens="none")
    n = len(browser)
    assert browser.index == 0
    browser.next()
    assert browser.index == 1
    browser.prev()
    browser.prev()
    assert browser.index == n - 1
    v = browser.show(0)
    assert f"conformer {locked.conformers[0].id} (rank 1 of {n})" in v.startjs
    assert browser.summary().startswith(locked.name)
