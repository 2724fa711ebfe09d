"""Tests of the MMFF94/MMFF94s bridge to OpenMM (:mod:`chairbuild.forcefields.mmff`).

External reference throughout: RDKit's own MMFF implementation
(``rdForceFieldHelpers.MMFFGetMoleculeProperties`` + ``MMFFGetMoleculeForceField``,
single terms switched on with ``props.SetMMFF*Term``; ``ForceField.CalcGrad``;
``ForceField.Minimize``). Geometries are ETKDG embeddings with a fixed seed, perturbed
by ~0.1 Å with a fixed NumPy seed so that no term sits at its minimum.
"""

from __future__ import annotations

import functools
import math
from dataclasses import dataclass
from pathlib import Path

import numpy as np
import pytest
from helpers import assert_close
from rdkit import Chem, RDLogger
from rdkit.Chem import AllChem, rdForceFieldHelpers, rdMolTransforms

from chairbuild.constants import KJ_TO_KCAL
from chairbuild.errors import ForceFieldError, OptionError
from chairbuild.forcefields.mmff import DEFAULT_TOLERANCE, MMFFModel, create_system
from chairbuild.forcefields.mmff_terms import TERM_GROUPS

DATA = Path(__file__).parent / "data"
EMBED_SEED = 0xC0FFEE
PERTURB_SEED = 20240607
PERTURB_SIGMA = 0.1  # Å

ENERGY_ATOL = 1.0e-4  # kcal/mol, per molecule, total and each term
FORCE_ATOL = 1.0e-3  # kcal/mol/Å, largest component
MINIMUM_ATOL = 0.01  # kcal/mol, minimised energies

TERMS = tuple(TERM_GROUPS)
#: RDKit switch of each term (MMFFMolProperties.SetMMFF*Term).
RDKIT_SWITCHES = {
    "bond": "SetMMFFBondTerm",
    "angle": "SetMMFFAngleTerm",
    "stretch_bend": "SetMMFFStretchBendTerm",
    "oop": "SetMMFFOopTerm",
    "torsion": "SetMMFFTorsionTerm",
    "vdw": "SetMMFFVdWTerm",
    "electrostatic": "SetMMFFEleTerm",
}
#: setting -> (variant, dielectric constant, distance-dependent dielectric)
SETTINGS = {
    "MMFF94": ("MMFF94", 1.0, False),
    "MMFF94s": ("MMFF94s", 1.0, False),
    "MMFF94-rdiel4": ("MMFF94", 4.0, True),
}


def _read_molecules() -> dict[str, str]:
    molecules = {}
    for line in (DATA / "mmff_molecules.smi").read_text().splitlines():
        if line.strip() and not line.startswith("#"):
            smiles, name = line.split()
            molecules[name] = smiles
    return molecules


MOLECULES = _read_molecules()


@functools.lru_cache(maxsize=None)
def _molecule(name: str) -> Chem.Mol:
    """The molecule with hydrogens and one perturbed ETKDG conformer."""
    mol = Chem.AddHs(Chem.MolFromSmiles(MOLECULES[name]))
    params = AllChem.ETKDGv3()
    params.randomSeed = EMBED_SEED
    if AllChem.EmbedMolecule(mol, params) != 0:
        raise RuntimeError(f"ETKDG failed for {name}")
    rng = np.random.default_rng(PERTURB_SEED)
    conf = mol.GetConformer()
    xyz = conf.GetPositions() + rng.normal(scale=PERTURB_SIGMA, size=(mol.GetNumAtoms(), 3))
    for i, p in enumerate(xyz):
        conf.SetAtomPosition(i, p.tolist())
    return mol


def _rdkit_props(mol: Chem.Mol, setting: str):
    variant, dielectric, distance = SETTINGS[setting]
    props = rdForceFieldHelpers.MMFFGetMoleculeProperties(mol, mmffVariant=variant)
    props.SetMMFFDielectricConstant(dielectric)
    props.SetMMFFDielectricModel(2 if distance else 1)  # RDKit: 1 constant, 2 distance
    return props


@dataclass
class Case:
    model: MMFFModel
    coords: np.ndarray
    reference: dict[str, float]
    reference_grad: np.ndarray


@functools.lru_cache(maxsize=None)
def _case(name: str, setting: str) -> Case:
    """Our model plus RDKit's MMFF energies (kcal/mol) and gradient at one geometry."""
    mol = _molecule(name)
    reference = {}
    for term, switch in RDKIT_SWITCHES.items():
        props = _rdkit_props(mol, setting)
        for other in RDKIT_SWITCHES.values():
            getattr(props, other)(other == switch)
        reference[term] = rdForceFieldHelpers.MMFFGetMoleculeForceField(mol, props).CalcEnergy()
    field = rdForceFieldHelpers.MMFFGetMoleculeForceField(mol, _rdkit_props(mol, setting))
    reference["total"] = field.CalcEnergy()
    grad = np.asarray(field.CalcGrad()).reshape(-1, 3)
    variant, dielectric, distance = SETTINGS[setting]
    model = MMFFModel(mol, variant=variant, dielectric=dielectric, distance_dependent=distance, threads=1)
    return Case(model, mol.GetConformer().GetPositions(), reference, grad)


def _setting_cases() -> list:
    cases = [pytest.param(name, "MMFF94", id=f"{name}-MMFF94") for name in MOLECULES]
    cases += [pytest.param(name, "MMFF94s", id=f"{name}-MMFF94s") for name in MOLECULES]
    cases += [pytest.param(name, "MMFF94-rdiel4", id=f"{name}-MMFF94-rdiel4") for name in MOLECULES]
    return cases


# --------------------------------------------------------------------------------------
# Energies, terms and gradients against RDKit's MMFF
# --------------------------------------------------------------------------------------


@pytest.mark.parametrize("name, setting", _setting_cases())
def test_energy_and_terms_match_rdkit(name: str, setting: str) -> None:
    """Total and each of the seven terms; reference: RDKit MMFFGetMoleculeForceField."""
    case = _case(name, setting)
    ours = {k: v * KJ_TO_KCAL for k, v in case.model.term_energies(case.coords).items()}
    ours["total"] = case.model.energy(case.coords) * KJ_TO_KCAL
    for term in (*TERMS, "total"):
        assert_close(
            ours[term], case.reference[term], ENERGY_ATOL,
            f"{name} {setting}: {term} energy (kcal/mol) vs RDKit MMFF",
        )


@pytest.mark.parametrize("name, setting", _setting_cases())
def test_gradient_matches_rdkit(name: str, setting: str) -> None:
    """Cartesian gradient; reference: RDKit ForceField.CalcGrad (kcal/mol/Å)."""
    case = _case(name, setting)
    _, grad = case.model.energy_and_gradient(case.coords)
    assert_close(
        grad * KJ_TO_KCAL, case.reference_grad, FORCE_ATOL,
        f"{name} {setting}: gradient (kcal/mol/Å) vs RDKit MMFF CalcGrad",
    )


def test_terms_sum_to_total() -> None:
    """Invariant: the term energies add up to the total energy (our own model)."""
    case = _case("N-cyclohexylacetamide", "MMFF94")
    terms = case.model.term_energies(case.coords)
    assert_close(sum(terms.values()), case.model.energy(case.coords), 1e-9, "sum of terms vs total")


@pytest.mark.parametrize(
    "name", ["N-methylacetamide", "acetonitrile", "methyl-azide", "methylammonium", "nitrobenzene", "thiane"]
)
def test_gradient_is_minus_finite_difference_of_energy(name: str) -> None:
    """Invariant: the gradient is the derivative of our own energy (central differences)."""
    case = _case(name, "MMFF94-rdiel4" if name == "methylammonium" else "MMFF94")
    x0 = case.coords
    _, grad = case.model.energy_and_gradient(x0)
    step = 1.0e-5  # Å
    numeric = np.zeros_like(x0)
    for i in range(x0.shape[0]):
        for k in range(3):
            plus, minus = x0.copy(), x0.copy()
            plus[i, k] += step
            minus[i, k] -= step
            numeric[i, k] = (case.model.energy(plus) - case.model.energy(minus)) / (2 * step)
    assert_close(grad, numeric, 1e-3, f"{name}: gradient vs central differences of energy (kJ/mol/Å)")


def test_units_at_the_boundary() -> None:
    """Energies are kJ/mol: RDKit's kcal/mol value times 4.184 (RDKit MMFF reference)."""
    case = _case("cyclohexanol", "MMFF94")
    assert_close(case.model.energy(case.coords), case.reference["total"] / KJ_TO_KCAL, 1e-3, "energy in kJ/mol")


# --------------------------------------------------------------------------------------
# Minimisation against RDKit's MMFF minimiser
# --------------------------------------------------------------------------------------

# Starts whose basin is unambiguous. (From its perturbed start cyclohexanone ends in
# the chair here but in a higher twist form with RDKit's minimiser: both are minima.)
MINIMISED = [
    "cyclohexane", "methylcyclohexane", "piperidine", "morpholine", "tetrahydropyran",
    "1,4-dioxane", "thiane", "cyclohexanol", "N-methylacetamide", "acetonitrile",
    "pyridine", "cyclohexylammonium",
]


def _rdkit_minimum(mol: Chem.Mol, coords: np.ndarray, setting: str = "MMFF94") -> tuple[float, np.ndarray]:
    mol = Chem.Mol(mol)
    conf = mol.GetConformer()
    for i, p in enumerate(coords):
        conf.SetAtomPosition(i, p.tolist())
    field = rdForceFieldHelpers.MMFFGetMoleculeForceField(mol, _rdkit_props(mol, setting))
    field.Minimize(maxIts=10000, forceTol=1e-8, energyTol=1e-12)
    return field.CalcEnergy(), np.asarray(field.Positions()).reshape(-1, 3)


@pytest.mark.parametrize("name", MINIMISED)
def test_minimum_matches_rdkit(name: str) -> None:
    """Same start, same minimum; reference: RDKit ForceField.Minimize(maxIts=10000)."""
    case = _case(name, "MMFF94")
    (result,) = case.model.minimize(case.coords[None])
    expected, _ = _rdkit_minimum(_molecule(name), case.coords)
    assert result.converged
    assert result.rms_gradient < DEFAULT_TOLERANCE
    assert_close(result.energy * KJ_TO_KCAL, expected, MINIMUM_ATOL, f"{name}: minimised energy vs RDKit")
    _, grad = case.model.energy_and_gradient(result.coords)
    assert math.sqrt(np.mean(grad**2)) < DEFAULT_TOLERANCE  # the documented criterion, rechecked


def test_batch_of_conformers_matches_rdkit() -> None:
    """Replicated (many-slot) path; reference: RDKit Minimize on each conformer."""
    mol = Chem.AddHs(Chem.MolFromSmiles("CC1CCC(O)CC1"))
    params = AllChem.ETKDGv3()
    params.randomSeed = EMBED_SEED
    AllChem.EmbedMultipleConfs(mol, 12, params)
    starts = np.array([c.GetPositions() for c in mol.GetConformers()])
    model = MMFFModel(mol, threads=1, slots=5)
    results = model.minimize(starts)
    expected = [_rdkit_minimum(mol, x)[0] for x in starts]
    got = [r.energy * KJ_TO_KCAL for r in results]
    assert all(r.converged for r in results)
    assert_close(got, expected, MINIMUM_ATOL, "minimised energies of 12 conformers vs RDKit")


@pytest.mark.parametrize("target, width", [(40.0, 0.0), (35.0, 10.0)])
def test_restrained_minimum_matches_rdkit_torsion_constraint(target: float, width: float) -> None:
    """Dihedral restraint; reference: RDKit MMFF + MMFFAddTorsionConstraint (same k, range)."""
    name = "methylcyclohexane"
    mol = _molecule(name)
    model = MMFFModel(mol, threads=1)
    ring = mol.GetRingInfo().AtomRings()[0]
    quad = tuple(ring[:4])
    k = 1000.0  # kJ mol^-1 rad^-2 in E = k * max(0, |dphi| - width)^2
    start = mol.GetConformer().GetPositions()
    (result,) = model.minimize(
        start, restraints=[(*quad, target)], restraint_force_constant=k, restraint_width=width
    )

    ref = Chem.Mol(mol)
    # RDKit's constraint force-constant convention, measured rather than assumed: the
    # energy of a lone constraint (unit constant) displaced by one degree.
    props = _rdkit_props(ref, "MMFF94")
    for switch in RDKIT_SWITCHES.values():
        getattr(props, switch)(False)
    probe = rdForceFieldHelpers.MMFFGetMoleculeForceField(ref, props)
    now = rdMolTransforms.GetDihedralDeg(ref.GetConformer(), *quad)
    probe.MMFFAddTorsionConstraint(*quad, False, now + 1.0, now + 1.0, 1.0)
    per_unit = probe.CalcEnergy()  # kcal/mol for a 1-degree deviation and unit constant
    ours_one_degree = k * math.radians(1.0) ** 2 * KJ_TO_KCAL  # kcal/mol
    field = rdForceFieldHelpers.MMFFGetMoleculeForceField(ref, _rdkit_props(ref, "MMFF94"))
    field.MMFFAddTorsionConstraint(*quad, False, target - width, target + width, ours_one_degree / per_unit)
    field.Minimize(maxIts=10000, forceTol=1e-8, energyTol=1e-12)
    ref_xyz = np.asarray(field.Positions()).reshape(-1, 3)
    ref_energy = rdForceFieldHelpers.MMFFGetMoleculeForceField(ref, _rdkit_props(ref, "MMFF94")).CalcEnergy(
        ref_xyz.ravel().tolist()
    )
    assert result.converged
    assert_close(result.energy * KJ_TO_KCAL, ref_energy, MINIMUM_ATOL, "restrained minimum: MMFF energy vs RDKit")
    assert_close(result.energy, model.energy(result.coords), 1e-9, "reported energy excludes the restraint")
    conf = Chem.Mol(mol).GetConformer()
    for i, p in enumerate(result.coords):
        conf.SetAtomPosition(i, p.tolist())
    ref_conf = Chem.Mol(mol).GetConformer()
    for i, p in enumerate(ref_xyz):
        ref_conf.SetAtomPosition(i, p.tolist())
    assert_close(
        rdMolTransforms.GetDihedralDeg(conf, *quad), rdMolTransforms.GetDihedralDeg(ref_conf, *quad), 0.1,
        "restrained dihedral (deg) vs RDKit",
    )
    # The same model without restraints afterwards: the unrestrained minimum again.
    (free,) = model.minimize(start)
    assert_close(free.energy * KJ_TO_KCAL, _rdkit_minimum(mol, start)[0], MINIMUM_ATOL, "unrestrained after restrained")


def test_restraint_must_be_a_bonded_dihedral() -> None:
    model = _case("methylcyclohexane", "MMFF94").model
    with pytest.raises(OptionError, match="not a bonded dihedral"):
        model.minimize(_case("methylcyclohexane", "MMFF94").coords, restraints=[(0, 5, 9, 12, 60.0)])


# --------------------------------------------------------------------------------------
# The replicated System and the batch path against single-conformer evaluation
# --------------------------------------------------------------------------------------


def test_copies_system_equals_single_evaluations() -> None:
    """n non-interacting copies: energy = sum of single energies, forces per copy."""
    import openmm

    name = "N-cyclohexylacetamide"
    mol = Chem.AddHs(Chem.MolFromSmiles(MOLECULES[name]))
    AllChem.EmbedMultipleConfs(mol, 4, randomSeed=EMBED_SEED)
    coords = np.array([c.GetPositions() for c in mol.GetConformers()])
    model = MMFFModel(mol, threads=1)
    system = create_system(mol, n_copies=len(coords))
    context = openmm.Context(system, openmm.VerletIntegrator(0.001), openmm.Platform.getPlatformByName("CPU"))
    context.setPositions(coords.reshape(-1, 3) * 0.1)
    state = context.getState(getEnergy=True, getForces=True)
    total = state.getPotentialEnergy().value_in_unit(openmm.unit.kilojoule_per_mole)
    forces = state.getForces(asNumpy=True).value_in_unit(openmm.unit.kilojoule_per_mole / openmm.unit.angstrom)
    singles = [model.energy_and_gradient(x) for x in coords]
    assert_close(total, sum(e for e, _ in singles), 1e-6, "copies energy vs sum of single energies")
    assert_close(
        -forces.reshape(coords.shape), np.array([g for _, g in singles]), 1e-6, "copies gradient vs single gradients"
    )


def test_batch_path_equals_single_path() -> None:
    """Minimising 8 conformers with 8 slots or one at a time gives the same results."""
    mol = Chem.AddHs(Chem.MolFromSmiles("OC1CCN(C)CC1"))
    AllChem.EmbedMultipleConfs(mol, 8, randomSeed=EMBED_SEED)
    starts = np.array([c.GetPositions() for c in mol.GetConformers()])
    batch = MMFFModel(mol, threads=1, slots=8).minimize(starts)
    single = MMFFModel(mol, threads=1, slots=1).minimize(starts)
    assert_close([r.energy for r in batch], [r.energy for r in single], 1e-4, "batch vs single energies (kJ/mol)")
    for b in batch:
        assert_close(b.energy, MMFFModel(mol, threads=1).energy(b.coords), 1e-9, "result energy vs energy()")


# --------------------------------------------------------------------------------------
# Errors
# --------------------------------------------------------------------------------------


@pytest.mark.parametrize(
    "smiles, index, element",
    [("CC[Se]CC", 2, "Se"), ("C[Te]C", 1, "Te"), ("C[Pt]C", 1, "Pt"), ("FI(F)F", 1, "I")],
)
def test_untypable_atom_is_named(smiles: str, index: int, element: str) -> None:
    """An atom MMFF cannot type: ForceFieldError names its index and element."""
    RDLogger.DisableLog("rdApp.*")
    try:
        mol = Chem.AddHs(Chem.MolFromSmiles(smiles))
    finally:
        RDLogger.EnableLog("rdApp.*")
    with pytest.raises(ForceFieldError, match=rf"atom {index} \({element}\)"):
        MMFFModel(mol)
    with pytest.raises(ForceFieldError, match=rf"atom {index} \({element}\)"):
        create_system(mol)


def test_missing_hydrogens_are_reported() -> None:
    mol = Chem.MolFromSmiles("OC1CCCCC1")
    with pytest.raises(ForceFieldError, match=r"explicit hydrogens.*atom 0 \(O\)"):
        MMFFModel(mol)


def test_empty_molecule_is_rejected() -> None:
    with pytest.raises(ForceFieldError, match="no atoms"):
        create_system(Chem.Mol())


def test_bad_options_and_coordinates() -> None:
    mol = _molecule("cyclohexane")
    with pytest.raises(OptionError, match="unknown MMFF variant"):
        MMFFModel(mol, variant="MMFF99")
    with pytest.raises(OptionError, match="dielectric"):
        MMFFModel(mol, dielectric=0.0)
    model = _case("cyclohexane", "MMFF94").model
    with pytest.raises(ForceFieldError, match="do not match"):
        model.energy(np.zeros((3, 3)))
    with pytest.raises(ForceFieldError, match="NaN"):
        model.energy(np.full((mol.GetNumAtoms(), 3), np.nan))


def test_variant_name_is_reported() -> None:
    assert _case("cyclohexane", "MMFF94").model.name == "MMFF94"
    assert _case("cyclohexane", "MMFF94s").model.name == "MMFF94s"


def test_hessian_matches_rdkit_gradient_differences() -> None:
    """Hessian; reference: central differences of RDKit's MMFF CalcGrad (same step)."""
    name, step = "N-methylacetamide", 0.005
    case = _case(name, "MMFF94")
    field = rdForceFieldHelpers.MMFFGetMoleculeForceField(_molecule(name), _rdkit_props(_molecule(name), "MMFF94"))
    x0 = case.coords.ravel()

    def rdkit_grad(x: np.ndarray) -> np.ndarray:
        # RDKit's CalcGrad(pos) reuses the interatomic distances cached by the previous
        # call; CalcEnergy(pos) refreshes them first.
        field.CalcEnergy(x.tolist())
        return np.asarray(field.CalcGrad(x.tolist()))

    expected = np.empty((x0.size, x0.size))
    for k in range(x0.size):
        plus, minus = x0.copy(), x0.copy()
        plus[k] += step
        minus[k] -= step
        expected[k] = (rdkit_grad(plus) - rdkit_grad(minus)) / (2 * step)
    expected = 0.5 * (expected + expected.T)
    assert_close(case.model.hessian(case.coords, step) * KJ_TO_KCAL, expected, 1e-3, f"{name}: Hessian (kcal/mol/Å²) vs RDKit")
