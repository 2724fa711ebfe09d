"""Open shells: which levels may rank a radical, and what the user is told.

A molecule with unpaired electrons (RDKit's radical electrons, e.g. ``[CH2]C1CCCCC1``)
has multiplicity 2S + 1 > 1 (:func:`chairbuild.input.charge_and_multiplicity`). MMFF94's
atom types and parameters describe closed-shell molecules only, so:

* a radical is refused when the ranking level (or the level that gives the thermal
  corrections of ``free_energy``) is MMFF94;
* at the GFN2-xTB levels it is computed open shell, with the molecule's total charge and
  its number of unpaired electrons (tblite's ``uhf``); MMFF94 then only pre-optimises the
  built structures, which a note says.

:func:`open_shell_notes` is the one place of this rule; the pipeline calls it before
any work starts, with the levels it is about to use.
"""

from __future__ import annotations

from chairbuild.errors import InputError
from chairbuild.optnames import spell

__all__ = ["radical_atoms", "open_shell_notes"]


def radical_atoms(mol) -> list[tuple[int, str, int]]:
    """``(index, element, unpaired electrons)`` of every atom carrying radical electrons (0-based)."""
    return [(a.GetIdx(), a.GetSymbol(), a.GetNumRadicalElectrons()) for a in mol.GetAtoms() if a.GetNumRadicalElectrons()]


def _describe(mol, multiplicity: int) -> str:
    atoms = radical_atoms(mol)
    unpaired = sum(n for _, _, n in atoms)
    where = ", ".join(f"atom {i} ({sym})" + (f" ×{n}" if n > 1 else "") for i, sym, n in atoms)
    return f"{unpaired} unpaired electron(s) on {where} (0-based atom numbers), multiplicity {multiplicity}"


def open_shell_notes(
    mol,
    multiplicity: int,
    *,
    ranking_level: str,
    ranking_open_shell: bool,
    thermal_level: str | None = None,
    thermal_open_shell: bool = True,
    geometry_level: str | None = None,
) -> tuple[str, ...]:
    """Check that an open-shell molecule is ranked by a level that treats open shells.

    Parameters
    ----------
    mol : rdkit.Chem.Mol
        The molecule (with its radical electrons).
    multiplicity : int
        2S + 1 (1: closed shell, nothing to check).
    ranking_level : str
        Name of the level whose energies rank the conformers (for messages).
    ranking_open_shell : bool
        Whether that level treats open shells (GFN2-xTB: yes; MMFF94: no).
    thermal_level : str, optional
        Level of the Hessians for free energies, when they are computed.
    thermal_open_shell : bool
        Whether ``thermal_level`` treats open shells.
    geometry_level : str, optional
        Level of the final geometries when it is not the ranking level (single points).

    Returns
    -------
    tuple of str
        Notes for the result (empty for a closed shell).

    Raises
    ------
    InputError
        A radical with a closed-shell ranking or thermal level; the message names the
        radical atoms and the level to use instead.
    """
    if multiplicity <= 1:
        return ()
    what = _describe(mol, multiplicity)
    gfn2 = f"{spell('method', 'gfn2')} (re-optimise with GFN2-xTB)"
    if not ranking_open_shell:
        raise InputError(
            f"the molecule is a radical: {what}; {ranking_level} describes closed shells only and cannot rank it. "
            f"Use the GFN2-xTB level: {gfn2}, or {spell('rerank', 'gfn2')} (GFN2-xTB single points at "
            "MMFF94 geometries)"
        )
    if thermal_level is not None and not thermal_open_shell:
        raise InputError(
            f"the molecule is a radical: {what}; the free energies would take their thermal corrections "
            f"from {thermal_level}, which describes closed shells only. Use {gfn2} with {spell('free_energy', True)}"
        )
    notes = [
        f"open shell: {what}; {ranking_level} computed with the total charge and "
        f"{sum(n for _, _, n in radical_atoms(mol))} unpaired electron(s); MMFF94 only pre-optimised "
        "the built structures (its atom types assume closed shells)"
    ]
    if geometry_level is not None:
        notes.append(
            f"the geometries are {geometry_level} minima, whose radical centre is typed as a closed-shell atom; "
            f"{spell('method', 'gfn2')} re-optimises them"
        )
    return tuple(notes)
