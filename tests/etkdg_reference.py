"""Reference ensemble from RDKit's ETKDG embedder + RDKit's MMFF minimiser (a general-purpose library).

Used by the completeness test and the benchmark: every distinct minimum that N random
embeddings reach, within a window of the lowest, must also be in chairbuild's ensemble.
Matching uses RDKit's own symmetry-aware RMSD (``rdMolAlign.GetBestRMS``), independent of
chairbuild's comparison code; for an achiral molecule the mirror image also counts.
"""

from __future__ import annotations

import time
from dataclasses import dataclass

import numpy as np
from rdkit import Chem
from rdkit.Chem import AllChem, rdMolAlign

KCAL_TO_KJ = 4.184  # thermochemical calorie (exact by definition)

#: Molecules of the completeness check (name, SMILES): mono-, di-, tri-substituted, heterocycles, a decalin.
COMPLETENESS_SET = (
    ("methylcyclohexane", "CC1CCCCC1"),
    ("isopropylcyclohexane", "CC(C)C1CCCCC1"),
    ("cyclohexanol", "OC1CCCCC1"),
    ("methoxycyclohexane", "COC1CCCCC1"),
    ("ethylcyclohexane", "CCC1CCCCC1"),
    ("cis-1,3-dimethylcyclohexane", "C[C@H]1CCC[C@@H](C)C1"),
    ("trans-1,2-dimethylcyclohexane", "C[C@@H]1CCCC[C@H]1C"),
    ("trans-4-tert-butylcyclohexyl acetate", "CC(=O)O[C@H]1CC[C@H](C(C)(C)C)CC1"),
    ("r-1,c-3,t-5-trimethylcyclohexane", "C[C@@H]1C[C@H](C)C[C@@H](C)C1"),
    ("menthol", "CC(C)[C@@H]1CC[C@@H](C)C[C@H]1O"),
    ("2-methoxytetrahydropyran", "CO[C@H]1CCCCO1"),
    ("N-methylpiperidine", "CN1CCCCC1"),
    ("4-methylpiperidine", "CC1CCNCC1"),
    ("1,3-dioxane-5-ol", "OC1COCOC1"),
    ("cyclohexanone, 2-methyl", "C[C@@H]1CCCCC1=O"),
    ("cis-decalin", "C1CC[C@H]2CCCC[C@H]2C1"),
    ("trans-decalin", "C1CC[C@@H]2CCCC[C@H]2C1"),
    # flexible substituents in both chair families: the lowest member of each family must be found
    # (the first once came out 6.8 kJ/mol too high in its diequatorial family)
    ("trans-4-(2-amino-3,5-dibromobenzylamino)cyclohexanol", "Nc1c(Br)cc(Br)cc1CN[C@H]1CC[C@H](O)CC1"),
    ("cis-4-(2-hydroxyethoxy)-N-methylcyclohexanemethanamine", "CNC[C@H]1CC[C@@H](OCCO)CC1"),
    ("trans-2-(2-methoxyethyl)cyclohexylmethanol", "OC[C@@H]1CCCC[C@H]1CCOC"),
)


@dataclass
class ReferenceMinimum:
    mol: Chem.Mol  # one conformer
    energy_kj: float


@dataclass
class ReferenceEnsemble:
    minima: list[ReferenceMinimum]
    n_embeddings: int
    n_minimisations: int
    seconds: float


def _heavy(mol: Chem.Mol, conf_id: int = -1) -> Chem.Mol:
    m = Chem.Mol(mol, confId=conf_id) if conf_id >= 0 else Chem.Mol(mol)
    return Chem.RemoveHs(m)


def mirror(mol: Chem.Mol) -> Chem.Mol:
    m = Chem.Mol(mol)
    conf = m.GetConformer()
    for i in range(m.GetNumAtoms()):
        p = conf.GetAtomPosition(i)
        conf.SetAtomPosition(i, (-p.x, p.y, p.z))
    return m


def same_structure(a: Chem.Mol, b: Chem.Mol, achiral: bool, rmsd: float = 0.3) -> bool:
    """Heavy-atom symmetry-aware RMSD below ``rmsd`` (mirror allowed for achiral molecules)."""
    ha, hb = Chem.RemoveHs(a), Chem.RemoveHs(b)
    if rdMolAlign.GetBestRMS(ha, hb) < rmsd:
        return True
    return achiral and rdMolAlign.GetBestRMS(mirror(ha), hb) < rmsd


def etkdg_reference(smiles_mol: Chem.Mol, n: int = 500, seed: int = 42, window_kj: float = 12.0, achiral: bool = False, threads: int = 1) -> ReferenceEnsemble:
    """Distinct MMFF94 minima reached from ``n`` ETKDG embeddings, within ``window_kj`` of the lowest."""
    t0 = time.perf_counter()
    mol = Chem.Mol(smiles_mol)
    params = AllChem.ETKDGv3()
    params.randomSeed = seed
    params.numThreads = threads
    ids = list(AllChem.EmbedMultipleConfs(mol, numConfs=n, params=params))
    results = AllChem.MMFFOptimizeMoleculeConfs(mol, numThreads=threads, maxIters=5000)
    seconds = time.perf_counter() - t0
    energies = np.array([e for _, e in results]) * KCAL_TO_KJ
    order = np.argsort(energies)
    e_min = energies[order[0]]
    minima: list[ReferenceMinimum] = []
    for k in order:
        if energies[k] - e_min > window_kj:
            break
        conf_mol = Chem.Mol(mol, confId=ids[k])
        if any(abs(m.energy_kj - energies[k]) < 0.5 and same_structure(m.mol, conf_mol, achiral) for m in minima):
            continue
        minima.append(ReferenceMinimum(mol=conf_mol, energy_kj=float(energies[k])))
    return ReferenceEnsemble(minima=minima, n_embeddings=len(ids), n_minimisations=len(ids), seconds=seconds)


def missing_minima(ensemble, reference: ReferenceEnsemble, achiral: bool) -> list[ReferenceMinimum]:
    """Reference minima with no chairbuild conformer of the same structure and energy (±0.5 kJ/mol).

    Energies are compared as absolute MMFF94 values (chairbuild's OpenMM MMFF94 equals RDKit's to
    1e-4 kcal/mol), so a lower global minimum found by only one side does not shift the comparison.
    """
    ours = ensemble.to_rdkit()
    missing = []
    for ref in reference.minima:
        found = False
        for rec, conf in zip(ensemble.conformers, ours.GetConformers()):
            if abs(rec.energies[ensemble.method] - ref.energy_kj) > 0.5:
                continue
            if same_structure(Chem.Mol(ours, confId=conf.GetId()), ref.mol, achiral):
                found = True
                break
        if not found:
            missing.append(ref)
    return missing
