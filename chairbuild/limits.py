"""How large a systematic search may get: rotamer counts and the size cap.

The systematic search builds every ring state and every rotamer combination up to a cap
per all-chair ring-state combination (:func:`chairbuild.build.rotamer_cap`), then varies
each rotor around the lowest minima (:func:`chairbuild.rotamers.rotamer_variations`). Both
grow with the molecule: the rotamer product as 3^n for n sp3–sp3 rotors (3^40 already
exceeds a 64-bit integer), the refinement as the square of the number of rotors. Counts are
therefore kept in Python integers, and molecules beyond the size cap are refused before any
work unless the caller asks for the reduced search.

Size cap
--------
A molecule is beyond the cap when it has more than :data:`MAX_HEAVY_ATOMS` heavy atoms or
more than :data:`MAX_ROTORS` rotatable bonds outside its analysed rings (the rotors of
:mod:`chairbuild.rings`). Without ``reduced_search`` such a molecule raises
:class:`~chairbuild.errors.InputError` (exit code 2 on the command line).

Reduced search
--------------
With ``reduced_search`` the rotors nearest the rings are enumerated up to
``REDUCED_MAX_ROTAMERS`` combinations (27: the three sp3 rotors nearest the rings; fewer
when ``max_rotamers`` is smaller), every other rotor keeps the torsion of the template
embedding, and the refinement pass that varies rotors around the lowest minima is skipped.
A note on the result says so.

Memory bound
------------
The build holds one starting structure (``3 x n_atoms`` floats) per all-chair core and
rotamer combination plus one per twist-boat core: with the automatic cap about
``max(1458, 81 x K)`` structures for K all-chair cores (ring-state, placement and
N-inversion combinations), with ``max_rotamers = M`` at most ``K x M``; the rotamer product
itself is never built beyond the cap. ``tests/benchmarks/bench_size_cap.py`` prints the
peak resident memory of a 152-heavy-atom case under the reduced search.
"""

from __future__ import annotations

import math
from typing import Sequence

from chairbuild.errors import InputError
from chairbuild.optnames import spell

__all__ = ["MAX_HEAVY_ATOMS", "MAX_ROTORS", "REDUCED_MAX_ROTAMERS", "count_rotamers", "format_count", "check_search_size"]

#: Largest number of heavy atoms searched systematically without ``reduced_search``.
MAX_HEAVY_ATOMS = 100
#: Largest number of rotatable bonds outside the rings searched without ``reduced_search``.
MAX_ROTORS = 30
#: Rotamer combinations per ring-state combination in the reduced search (at most).
REDUCED_MAX_ROTAMERS = 27


def count_rotamers(rotors: Sequence) -> int:
    """Exact number of rotamer combinations (product of each rotor's starting values), a Python int."""
    return math.prod(len(r.angles) for r in rotors)


def format_count(n: int) -> str:
    """``n`` in digits up to a million, else as a power of ten (``"about 4.2e+69"``)."""
    if n <= 1_000_000:
        return str(n)
    exponent = len(str(n)) - 1
    mantissa = int(str(n)[:3]) / 100.0
    return f"about {mantissa:.1f}e+{exponent:02d}"


def check_search_size(n_heavy_atoms: int, rotors: Sequence, reduced_search: bool) -> tuple[str, ...]:
    """Refuse a molecule beyond the size cap, or return the note of the reduced search.

    Parameters
    ----------
    n_heavy_atoms : int
    rotors : sequence of Rotor
        The rotatable bonds of :func:`chairbuild.rings.analyse_rings`.
    reduced_search : bool
        Search a molecule beyond the cap in the reduced way instead of refusing it.

    Returns
    -------
    tuple of str
        Notes for the result (empty below the cap).

    Raises
    ------
    InputError
        Beyond the cap without ``reduced_search``.
    """
    over = []
    if n_heavy_atoms > MAX_HEAVY_ATOMS:
        over.append(f"{n_heavy_atoms} heavy atoms (cap {MAX_HEAVY_ATOMS})")
    if len(rotors) > MAX_ROTORS:
        over.append(f"{len(rotors)} rotatable bonds outside the rings (cap {MAX_ROTORS})")
    if not over:
        return ()
    combos = format_count(count_rotamers(rotors))
    if not reduced_search:
        raise InputError(
            f"molecule too large for the systematic search: {' and '.join(over)}, {combos} rotamer "
            f"combinations; use {spell('reduced_search', True)} to search its rings with the rotors "
            "nearest them only (the others keep their embedded torsions)"
        )
    return (
        f"reduced search: {' and '.join(over)}; only the rotors nearest the rings were enumerated, the others "
        "keep the torsions of the embedded template and no rotor refinement was run, so low minima that "
        "depend on those rotors may be missing and the populations are a partial estimate",
    )
