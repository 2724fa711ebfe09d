"""3D view of an ensemble in a notebook (py3Dmol), with labelled ring substituents.

The viewer only reads the :class:`~chairbuild.result.Ensemble`. Its molecule text is the
multi-conformer SDF that :func:`chairbuild.output.sdf_text` writes, for a copy of the
ensemble whose conformers are superposed on the ring atoms of one reference conformer
(:func:`aligned_ensemble`), so that stepping through conformers or overlaying them keeps
the rings in place.

A scene is a list of 3Dmol.js calls (:func:`scene_calls`). :func:`view` replays them on a
``py3Dmol.view``; the HTML report (:mod:`chairbuild.report`) replays the same calls in
the browser, so the labels, colours and legend are the same in both.

Label scheme of this project (explained in the scene's legend):

=====================  ======  ==========================================================
position               text    colour
=====================  ======  ==========================================================
axial                  ax      burnt orange ``#c2410c``
equatorial             eq      deep teal ``#0f766e``
pseudo-axial           p-ax    amber ``#b45309``
pseudo-equatorial      p-eq    sea green ``#15803d``
isoclinal              iso     violet ``#6d28d9``
in-plane               plane   slate ``#475569``
=====================  ======  ==========================================================

Hydrogens that take part in a syn-1,3 contact with an axial substituent (axial H on the
ring atoms two positions away, on the same face of the ring) are drawn as pink spheres
``#db2777``; endocyclic torsion labels are dark text on a pale background.
"""

from __future__ import annotations

import enum
import warnings
from dataclasses import dataclass, replace
from typing import Any, Sequence

import numpy as np

from chairbuild.choices import Choice
from chairbuild.errors import InputError, OptionError
from chairbuild.result import ConformerRecord, Ensemble, Position, RingShape

__all__ = [
    "HydrogenMode",
    "LabelKind",
    "Label",
    "LegendEntry",
    "POSITION_COLOURS",
    "POSITION_TEXT",
    "SYN_AXIAL_H_COLOUR",
    "TORSION_COLOUR",
    "scene_labels",
    "coupling_labels",
    "COUPLING_COLOUR",
    "relevant_hydrogens",
    "hydrogen_atoms",
    "legend_entries",
    "title_text",
    "overlay_title",
    "aligned_ensemble",
    "kabsch_rmsd",
    "scene_layers",
    "compose",
    "compose_config",
    "overlay_config",
    "scene_calls",
    "view",
    "ConformerBrowser",
]


class HydrogenMode(Choice):
    """Which hydrogens the scene draws."""

    RELEVANT = "relevant"
    ALL = "all"
    NONE = "none"

    @classmethod
    def describe(cls) -> str:
        return "hydrogen mode"


class LabelKind(str, enum.Enum):
    """What a scene label marks."""

    POSITION = "position"
    TORSION = "torsion"
    COUPLING = "coupling"


#: Label colour of each substituent position (this project's own scheme).
POSITION_COLOURS: dict[Position, str] = {
    Position.AXIAL: "#c2410c",
    Position.EQUATORIAL: "#0f766e",
    Position.PSEUDO_AXIAL: "#b45309",
    Position.PSEUDO_EQUATORIAL: "#15803d",
    Position.ISOCLINAL: "#6d28d9",
    Position.IN_PLANE: "#475569",
}
#: Short label text of each position.
POSITION_TEXT: dict[Position, str] = {
    Position.AXIAL: "ax",
    Position.EQUATORIAL: "eq",
    Position.PSEUDO_AXIAL: "p-ax",
    Position.PSEUDO_EQUATORIAL: "p-eq",
    Position.ISOCLINAL: "iso",
    Position.IN_PLANE: "plane",
}
#: Colour of the hydrogens in a syn-1,3 contact with an axial substituent.
SYN_AXIAL_H_COLOUR = "#db2777"
#: Background of H–H coupling labels and colour of the line joining the two protons.
COUPLING_COLOUR = "#4338ca"
#: Background of endocyclic torsion labels (text is dark slate).
TORSION_COLOUR = "#e2e8f0"
_TORSION_FONT = "#1e293b"
_OVERLAY_COLOURS = ("#2563eb", "#9333ea", "#ca8a04", "#0891b2", "#be123c", "#4d7c0f", "#7c2d12", "#334155")
_OVERLAY_RADIUS = 0.06
_OVERLAY_OPACITY = 0.55
_LABEL_OFFSET_A = 0.35
_VIEW_TILT_DEG = 20.0
_H_MEANING = "axial H syn-1,3 to an axial substituent"
_TORSION_MEANING = "endocyclic torsion"


@dataclass(frozen=True)
class Label:
    """One text label of the 3D scene.

    Attributes
    ----------
    atom : int
        Atom the label belongs to: the substituent's first atom for a position label, the
        first atom of the central bond for a torsion label.
    text : str
        Text shown.
    colour : str
        Background colour (hex).
    kind : LabelKind
    position : Position or None
        The substituent position (position labels only), copied from the result.
    ring_index : int
        Ring the label refers to.
    ring_atom : int or None
        Ring atom carrying the substituent (position labels only).
    atoms : tuple of int
        The four torsion atoms (torsion labels), or (ring_atom, atom).
    value : float or None
        Torsion angle in degrees (torsion labels only).
    xyz : tuple of float
        Where the label is anchored (Å, in the coordinates of the aligned ensemble).
    """

    atom: int
    text: str
    colour: str
    kind: LabelKind
    position: Position | None = None
    ring_index: int = 0
    ring_atom: int | None = None
    atoms: tuple[int, ...] = ()
    value: float | None = None
    xyz: tuple[float, float, float] = (0.0, 0.0, 0.0)


@dataclass(frozen=True)
class LegendEntry:
    """One line of the legend: a colour swatch, the label text and its meaning."""

    text: str
    colour: str
    meaning: str


# --------------------------------------------------------------------------- helpers
def _conformer(result: Ensemble, conformer: int) -> ConformerRecord:
    if not isinstance(result, Ensemble):
        raise InputError(f"expected a chairbuild.result.Ensemble, got {type(result).__name__}")
    if not result.conformers:
        raise InputError(f"{result.name!r} has no conformer to show")
    n = len(result.conformers)
    if isinstance(conformer, bool) or not isinstance(conformer, (int, np.integer)) or not -n <= conformer < n:
        raise OptionError(f"conformer must be an index from 0 to {n - 1}, got {conformer!r}")
    return result.conformers[int(conformer)]


def _neighbours(result: Ensemble) -> list[list[int]]:
    from rdkit import Chem

    mol = Chem.MolFromMolBlock(result.mol_block, removeHs=False, sanitize=False)
    if mol is None:
        raise InputError(f"the molecule block of {result.name!r} cannot be read")
    return [[n.GetIdx() for n in atom.GetNeighbors()] for atom in mol.GetAtoms()]


def hydrogen_atoms(result: Ensemble) -> tuple[int, ...]:
    """Indices of all hydrogen atoms."""
    return tuple(i for i, s in enumerate(result.symbols) if s == "H")


def relevant_hydrogens(result: Ensemble, conformer: int = 0) -> tuple[int, ...]:
    """Hydrogens in a syn-1,3 contact with an axial substituent in one conformer.

    For every chair ring and every substituent the result marks axial on it, the
    hydrogens on the ring atoms two positions away on either side that are themselves
    axial (same criterion as :func:`chairbuild.describe.substituent_position`) and point
    to the same face of the ring as the substituent.

    Parameters
    ----------
    result : Ensemble
    conformer : int
        Index into ``result.conformers``.

    Returns
    -------
    tuple of int
        Sorted atom indices.
    """
    from chairbuild.describe import mean_plane_normal, substituent_position

    rec = _conformer(result, conformer)
    xyz = np.asarray(rec.coords, dtype=float)
    neighbours = _neighbours(result)
    found: set[int] = set()
    for sub in rec.substituents:
        ring_desc = rec.rings[sub.ring_index]
        if sub.position is not Position.AXIAL or ring_desc.shape is not RingShape.CHAIR:
            continue
        ring = list(result.ring_atoms[sub.ring_index])
        normal = mean_plane_normal(xyz[ring])
        side = np.sign(np.dot(xyz[sub.atom] - xyz[sub.ring_atom], normal))
        i = ring.index(sub.ring_atom)
        for j in (i - 2, i + 2):
            partner = ring[j % len(ring)]
            for h in neighbours[partner]:
                if result.symbols[h] != "H":
                    continue
                pos, _ = substituent_position(xyz, ring, partner, h, RingShape.CHAIR)
                if pos is Position.AXIAL and np.sign(np.dot(xyz[h] - xyz[partner], normal)) == side:
                    found.add(h)
    return tuple(sorted(found))


def scene_labels(result: Ensemble, conformer: int = 0, torsion_labels: bool = False) -> list[Label]:
    """The labels of one conformer's scene, as plain data.

    One position label per ring substituent recorded in the result (same atom, ring atom,
    ring and position flag), then, with ``torsion_labels``, one label per endocyclic
    torsion of each ring at the middle of its central bond.

    Parameters
    ----------
    result : Ensemble
    conformer : int
        Index into ``result.conformers``.
    torsion_labels : bool
        Add the endocyclic torsion labels.

    Returns
    -------
    list of Label
    """
    rec = _conformer(result, conformer)
    xyz = np.asarray(rec.coords, dtype=float)
    several_rings = len(result.ring_atoms) > 1
    labels: list[Label] = []
    for sub in rec.substituents:
        bond = xyz[sub.atom] - xyz[sub.ring_atom]
        anchor = xyz[sub.atom] + _LABEL_OFFSET_A * bond / max(np.linalg.norm(bond), 1e-9)
        text = f"{sub.label(result.symbols)} {POSITION_TEXT[sub.position]}"
        if several_rings:
            text += f" (ring {sub.ring_index})"
        labels.append(
            Label(
                atom=sub.atom,
                text=text,
                colour=POSITION_COLOURS[sub.position],
                kind=LabelKind.POSITION,
                position=sub.position,
                ring_index=sub.ring_index,
                ring_atom=sub.ring_atom,
                atoms=(sub.ring_atom, sub.atom),
                xyz=tuple(float(v) for v in anchor),
            )
        )
    if torsion_labels:
        for r, ring_desc in enumerate(rec.rings):
            ring = ring_desc.atoms
            n = len(ring)
            for k, angle in enumerate(ring_desc.torsions):
                quad = tuple(ring[(k + m) % n] for m in range(4))
                mid = 0.5 * (xyz[quad[1]] + xyz[quad[2]])
                labels.append(
                    Label(
                        atom=quad[1],
                        text=f"{angle:+.0f}°",
                        colour=TORSION_COLOUR,
                        kind=LabelKind.TORSION,
                        ring_index=r,
                        atoms=quad,
                        value=float(angle),
                        xyz=tuple(float(v) for v in mid),
                    )
                )
    return labels


def coupling_labels(result: Ensemble, conformer: int = 0, pairs: Sequence[tuple[str, str]] = ()) -> list[Label]:
    """One label per chosen H–H pair: its 3J in this conformer and the ensemble ⟨J⟩.

    The label sits at the middle of the two protons (of a methyl group's centroid).

    Parameters
    ----------
    result : Ensemble
    conformer : int
        Index into ``result.conformers``.
    pairs : sequence of (str, str)
        Proton labels or atom indices (see :mod:`chairbuild.couplings.records`).

    Raises
    ------
    InputError
        The ensemble has no couplings, or a pair is not a vicinal coupling.
    """
    rec = _conformer(result, conformer)
    if pairs and (result.couplings is None or not result.couplings.pairs):
        raise InputError(f"{result.name!r} has no computed couplings to label")
    k = int(conformer) % len(result.conformers)
    xyz = np.asarray(rec.coords, dtype=float)
    out = []
    for a, b in pairs:
        coupling = result.couplings.find(a, b)
        ends = [xyz[list(h)].mean(axis=0) for h in coupling.hydrogens]
        mid = 0.5 * (ends[0] + ends[1])
        out.append(
            Label(
                atom=coupling.hydrogens[0][0],
                text=f"{coupling.name} {coupling.values[k]:.1f} Hz (<J> {coupling.average:.1f})",
                colour=COUPLING_COLOUR,
                kind=LabelKind.COUPLING,
                ring_index=coupling.ring_index or 0,
                atoms=coupling.hydrogens[0] + coupling.hydrogens[1],
                value=float(coupling.values[k]),
                xyz=tuple(float(v) for v in mid),
            )
        )
    return out


def _coupling_calls(ens: Ensemble, k: int, model: int, pairs: Sequence[tuple[str, str]]) -> list[tuple[str, list[Any]]]:
    """Spheres on the coupled protons, a dashed line between them and the J label."""
    calls: list[tuple[str, list[Any]]] = []
    xyz = np.asarray(ens.conformers[k].coords, dtype=float)
    for (a, b), lab in zip(pairs, coupling_labels(ens, k, pairs)):
        coupling = ens.couplings.find(a, b)
        calls.append(("setStyle", [{"model": model, "index": list(lab.atoms)}, {"stick": {"radius": 0.1}, "sphere": {"radius": 0.25, "color": COUPLING_COLOUR}}]))
        ends = [xyz[list(h)].mean(axis=0) for h in coupling.hydrogens]
        calls.append(("addCylinder", [{"start": _round_xyz(ends[0]), "end": _round_xyz(ends[1]), "radius": 0.04, "dashed": True, "color": COUPLING_COLOUR}]))
        calls.append(("addLabel", [lab.text, _label_spec(lab)]))
    return calls


def legend_entries(labels: Sequence[Label] = (), syn_axial_hydrogens: bool = True, complete: bool = False) -> list[LegendEntry]:
    """Legend lines for a set of labels (or for every category with ``complete``)."""
    meanings = {
        Position.AXIAL: "axial substituent (chair)",
        Position.EQUATORIAL: "equatorial substituent (chair)",
        Position.PSEUDO_AXIAL: "pseudo-axial (non-chair ring)",
        Position.PSEUDO_EQUATORIAL: "pseudo-equatorial (non-chair ring)",
        Position.ISOCLINAL: "isoclinal (non-chair ring)",
        Position.IN_PLANE: "in the local plane of an sp2 ring atom",
    }
    present = {lab.position for lab in labels if lab.kind is LabelKind.POSITION}
    out = [
        LegendEntry(POSITION_TEXT[p], POSITION_COLOURS[p], meanings[p])
        for p in Position
        if complete or p in present
    ]
    if complete or syn_axial_hydrogens:
        out.append(LegendEntry("H", SYN_AXIAL_H_COLOUR, _H_MEANING))
    if complete or any(lab.kind is LabelKind.TORSION for lab in labels):
        out.append(LegendEntry("±n°", TORSION_COLOUR, _TORSION_MEANING))
    return out


def title_text(result: Ensemble, conformer: int = 0) -> str:
    """One-line title of a conformer: rank, relative energy, population, ring shapes."""
    rec = _conformer(result, conformer)
    shapes = ", ".join(r.shape.value for r in rec.rings)
    return (
        f"{result.name} | conformer {rec.id} (rank {int(conformer) % len(result.conformers) + 1} of {len(result.conformers)}) | "
        f"{'dG' if result.ranking == 'free_energy' else 'dE'} {rec.relative_energy:.2f} kJ/mol | "
        f"population {100 * rec.population:.1f} % | {shapes}"
    )


def overlay_title(result: Ensemble, conformer: int = 0) -> str:
    """Title of the overlay of every conformer, labelled on one of them."""
    rec = _conformer(result, conformer)
    return f"{result.name} | overlay of {len(result.conformers)} conformers on the ring atoms | labelled: conformer {rec.id}"


# --------------------------------------------------------------------------- alignment
def _kabsch(mobile: np.ndarray, target: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Rotation R and centroids so that (x - c_m) @ R.T + c_t best fits target."""
    c_m = mobile.mean(axis=0)
    c_t = target.mean(axis=0)
    h = (mobile - c_m).T @ (target - c_t)
    u, _, vt = np.linalg.svd(h)
    d = np.sign(np.linalg.det(vt.T @ u.T))
    rot = vt.T @ np.diag([1.0, 1.0, d]) @ u.T
    return rot, c_m, c_t


def kabsch_rmsd(mobile: np.ndarray, target: np.ndarray) -> float:
    """RMSD (Å) of two point sets after optimal superposition (rotation, no reflection)."""
    a = np.asarray(mobile, dtype=float)
    b = np.asarray(target, dtype=float)
    if a.shape != b.shape or a.ndim != 2 or a.shape[1] != 3:
        raise InputError(f"point sets must both be (n, 3), got {a.shape} and {b.shape}")
    rot, c_a, c_b = _kabsch(a, b)
    fitted = (a - c_a) @ rot.T + c_b
    return float(np.sqrt(((fitted - b) ** 2).sum(axis=1).mean()))


def _view_frame(points: np.ndarray, spread: np.ndarray | None = None, tilt_deg: float = _VIEW_TILT_DEG) -> np.ndarray:
    """Proper rotation that shows the best plane of ``points`` nearly edge-on.

    The plane's normal becomes the screen's y axis, so a chair looks the way it is usually
    drawn (axial bonds vertical, equatorial bonds sideways). Within the plane, the x axis
    is the direction (in 15° steps) that leaves the least depth to the atoms in ``spread``
    (default ``points``), so substituents spread across the screen instead of hiding
    behind each other. A tilt about x then shows the plane slightly from above.
    """
    centre = points.mean(axis=0)
    _, _, vt = np.linalg.svd(points - centre)
    e1, e2, normal = vt[0], vt[1], vt[2]
    cloud = (points if spread is None else spread) - centre
    best = None
    for angle in np.radians(np.arange(0.0, 180.0, 15.0)):
        x_axis = np.cos(angle) * e1 + np.sin(angle) * e2
        depth = float(np.var(cloud @ np.cross(x_axis, normal)))
        if best is None or depth < best[0] - 1e-9:
            best = (depth, x_axis)
    x_axis = best[1]
    frame = np.vstack([x_axis, normal, np.cross(x_axis, normal)])
    t = np.radians(tilt_deg)
    tilt = np.array([[1.0, 0.0, 0.0], [0.0, np.cos(t), -np.sin(t)], [0.0, np.sin(t), np.cos(t)]])
    return tilt @ frame


def aligned_ensemble(result: Ensemble, reference: int = 0) -> Ensemble:
    """A copy of ``result`` with every conformer superposed on the ring atoms of ``reference``.

    All atoms of all six-membered rings are fitted (rotation and translation only), so
    mirror images are never produced. The reference itself is turned so that the mean
    plane of its rings is seen nearly edge-on (:func:`_view_frame`), centred at the origin.
    The input is not changed.
    """
    ref = _conformer(result, reference)
    fit_atoms = sorted({a for ring in result.ring_atoms for a in ring})
    if len(fit_atoms) < 3:
        fit_atoms = [i for i, s in enumerate(result.symbols) if s != "H"]
    ref_xyz = np.asarray(ref.coords, dtype=float)
    ref_fit = ref_xyz[fit_atoms]
    heavy = ref_xyz[[i for i, s in enumerate(result.symbols) if s != "H"]]
    target = (ref_fit - ref_fit.mean(axis=0)) @ _view_frame(ref_fit, heavy).T
    moved = []
    for rec in result.conformers:
        xyz = np.asarray(rec.coords, dtype=float)
        rot, c_m, c_t = _kabsch(xyz[fit_atoms], target)
        moved.append(replace(rec, coords=(xyz - c_m) @ rot.T + c_t))
    return replace(result, conformers=tuple(moved))


def _sdf_blocks(result: Ensemble) -> list[str]:
    from chairbuild.output import sdf_text

    text = sdf_text(result)
    blocks = [b.lstrip("\n") + "$$$$\n" for b in text.split("$$$$\n") if b.strip()]
    if len(blocks) != len(result.conformers):
        raise InputError(f"SDF of {result.name!r} has {len(blocks)} records for {len(result.conformers)} conformers")
    return blocks


# --------------------------------------------------------------------------- scene
_STICK = {"radius": 0.15}
_HIDDEN: dict[str, Any] = {}
_LEGEND_STEP_PX = 20


def _round_xyz(xyz: Sequence[float]) -> dict[str, float]:
    return {"x": round(float(xyz[0]), 3), "y": round(float(xyz[1]), 3), "z": round(float(xyz[2]), 3)}


def _label_spec(label: Label) -> dict[str, Any]:
    if label.kind is LabelKind.TORSION:
        return {
            "position": _round_xyz(label.xyz),
            "backgroundColor": label.colour,
            "backgroundOpacity": 0.8,
            "fontColor": _TORSION_FONT,
            "fontSize": 11,
            "alignment": "center",
            "inFront": True,
        }
    return {
        "position": _round_xyz(label.xyz),
        "backgroundColor": label.colour,
        "backgroundOpacity": 0.9,
        "fontColor": "white",
        "fontSize": 13,
        "borderThickness": 1.0,
        "borderColor": "white",
        "alignment": "bottomLeft",
        "inFront": True,
    }


def _merged_position_labels(labels: Sequence[Label]) -> list[tuple[str, dict[str, Any]]]:
    """Position labels on one atom (a fused-ring atom can be a substituent of two rings) share a box."""
    by_atom: dict[int, list[Label]] = {}
    for lab in labels:
        if lab.kind is LabelKind.POSITION:
            by_atom.setdefault(lab.atom, []).append(lab)
    return [(" / ".join(lab.text for lab in group), _label_spec(group[0])) for group in by_atom.values()]


def _entry_dict(entry: LegendEntry) -> dict[str, str]:
    return {"text": entry.text, "colour": entry.colour, "meaning": entry.meaning}


def scene_layers(
    result: Ensemble,
    conformer: int = 0,
    *,
    overlay: bool = False,
    aligned: Ensemble | None = None,
) -> dict[str, Any]:
    """The parts of one scene, before the display options are applied (plain JSON-able data).

    :func:`compose` turns the layers into 3Dmol.js calls for one hydrogen mode and
    torsion-label setting; the HTML report stores the layers and composes them in the
    browser the same way.

    Parameters
    ----------
    result : Ensemble
    conformer : int
        Index into ``result.conformers``: the conformer drawn in full and labelled.
    overlay : bool
        Include every conformer (the others drawn as thin sticks).
    aligned : Ensemble, optional
        A precomputed :func:`aligned_ensemble` of ``result``.

    Returns
    -------
    dict
        ``models`` (conformer indices, in model order), ``main`` (model index of the
        labelled conformer), ``styles`` (calls per hydrogen mode), ``labels`` and
        ``torsions`` (label calls), ``title`` (text), ``legend`` (entries for the
        position labels) and ``has_relevant_h``.
    """
    _conformer(result, conformer)
    k = int(conformer) % len(result.conformers)
    ens = aligned if aligned is not None else aligned_ensemble(result, reference=0)
    order = list(range(len(ens.conformers))) if overlay else [k]
    main = order.index(k)
    hydrogens = list(hydrogen_atoms(ens))
    relevant = list(relevant_hydrogens(ens, k))
    base = [("setStyle", [{"model": main}, {"stick": dict(_STICK)}])]
    hide_h = [("setStyle", [{"model": main, "index": hydrogens}, dict(_HIDDEN)])] if hydrogens else []
    mark_h = (
        [
            (
                "setStyle",
                [
                    {"model": main, "index": relevant},
                    {"stick": {"radius": 0.1}, "sphere": {"radius": 0.3, "color": SYN_AXIAL_H_COLOUR}},
                ],
            )
        ]
        if relevant
        else []
    )
    others: list[tuple[str, list[Any]]] = []
    if overlay:
        heavy = [i for i, s in enumerate(ens.symbols) if s != "H"]
        for pos, m in enumerate(order):
            if m == k:
                continue
            colour = _OVERLAY_COLOURS[m % len(_OVERLAY_COLOURS)]
            others.append(("setStyle", [{"model": pos}, dict(_HIDDEN)]))
            stick = {"radius": _OVERLAY_RADIUS, "color": colour, "opacity": _OVERLAY_OPACITY}
            others.append(("setStyle", [{"model": pos, "index": heavy}, {"stick": stick}]))
    styles = {
        HydrogenMode.RELEVANT.value: base + hide_h + mark_h + others,
        HydrogenMode.ALL.value: base + mark_h + others,
        HydrogenMode.NONE.value: base + hide_h + others,
    }
    labels = scene_labels(ens, k, torsion_labels=True)
    position_labels = [("addLabel", [text, spec]) for text, spec in _merged_position_labels(labels)]
    torsions = [("addLabel", [lab.text, _label_spec(lab)]) for lab in labels if lab.kind is LabelKind.TORSION]
    title = overlay_title(result, k) if overlay else title_text(result, k)
    legend = [_entry_dict(e) for e in legend_entries(labels, syn_axial_hydrogens=False) if e.text not in ("H", "±n°")]
    return {
        "models": order,
        "main": main,
        "styles": {mode: [[n, a] for n, a in calls] for mode, calls in styles.items()},
        "labels": [[n, a] for n, a in position_labels],
        "torsions": [[n, a] for n, a in torsions],
        "title": title,
        "legend": legend,
        "has_relevant_h": bool(relevant),
    }


def compose(
    layers: dict[str, Any],
    show_hydrogens: HydrogenMode | str = HydrogenMode.RELEVANT,
    torsion_labels: bool = False,
    legend: bool = True,
    height: int = 480,
) -> list[tuple[str, list[Any]]]:
    """3Dmol.js calls of one scene (without ``addModel``) from :func:`scene_layers`.

    The report's JavaScript (``composeScene`` in :mod:`chairbuild.report`) does the same
    steps; keep the two in step.
    """
    mode = HydrogenMode.parse(show_hydrogens)
    cfg = compose_config()
    calls: list[tuple[str, list[Any]]] = [(n, a) for n, a in layers["styles"][mode.value]]
    calls += [(n, a) for n, a in layers["labels"]]
    if torsion_labels:
        calls += [(n, a) for n, a in layers["torsions"]]
    if legend:
        calls.append(("addLabel", [layers["title"], dict(cfg["title_spec"])]))
        entries = list(layers["legend"])
        if mode is not HydrogenMode.NONE and layers["has_relevant_h"]:
            entries.append(cfg["h_entry"])
        if torsion_labels and layers["torsions"]:
            entries.append(cfg["torsion_entry"])
        for i, entry in enumerate(reversed(entries)):
            spec = dict(cfg["legend_spec"])
            spec["position"] = {"x": 6, "y": height - 6 - cfg["legend_step"] * i, "z": 0}
            spec["backgroundColor"] = entry["colour"]
            spec["fontColor"] = cfg["torsion_font"] if entry["colour"] == TORSION_COLOUR else "white"
            calls.append(("addLabel", [f"{entry['text']} = {entry['meaning']}", spec]))
    calls.append(("zoomTo", [{"model": layers["main"]}]))
    return calls


def compose_config() -> dict[str, Any]:
    """Constants :func:`compose` uses (the report passes them to its JavaScript twin)."""
    return {
        "title_spec": {
            "position": {"x": 6, "y": 6, "z": 0},
            "useScreen": True,
            "fontSize": 12,
            "backgroundColor": "#111827",
            "backgroundOpacity": 0.85,
            "fontColor": "white",
        },
        "legend_spec": {"useScreen": True, "alignment": "bottomLeft", "fontSize": 11, "backgroundOpacity": 0.9},
        "legend_step": _LEGEND_STEP_PX,
        "h_entry": _entry_dict(LegendEntry("H", SYN_AXIAL_H_COLOUR, _H_MEANING)),
        "torsion_entry": _entry_dict(LegendEntry("±n°", TORSION_COLOUR, _TORSION_MEANING)),
        "torsion_font": _TORSION_FONT,
    }


def overlay_config() -> dict[str, Any]:
    """How :func:`scene_layers` draws the other conformers of an overlay (the report rebuilds them in JS)."""
    return {"colours": list(_OVERLAY_COLOURS), "radius": _OVERLAY_RADIUS, "opacity": _OVERLAY_OPACITY}


def scene_calls(
    result: Ensemble,
    conformer: int = 0,
    *,
    overlay: bool = False,
    show_hydrogens: HydrogenMode | str = HydrogenMode.RELEVANT,
    torsion_labels: bool = False,
    legend: bool = True,
    height: int = 480,
) -> list[tuple[str, list[Any]]]:
    """All 3Dmol.js calls that draw one scene, ``addModel`` first, as ``(method, arguments)`` pairs.

    The models are the SDF records :func:`chairbuild.output.sdf_text` writes for the
    :func:`aligned_ensemble` of ``result``. Parameters as in :func:`view`.
    """
    mode = HydrogenMode.parse(show_hydrogens)
    ens = aligned_ensemble(result, reference=0)
    layers = scene_layers(result, conformer, overlay=overlay, aligned=ens)
    blocks = _sdf_blocks(ens)
    calls: list[tuple[str, list[Any]]] = [("addModel", [blocks[m], "sdf"]) for m in layers["models"]]
    return calls + compose(layers, mode, torsion_labels=torsion_labels, legend=legend, height=height)


def view(
    result: Ensemble,
    conformer: int = 0,
    overlay: bool = False,
    show_hydrogens: HydrogenMode | str = HydrogenMode.RELEVANT,
    torsion_labels: bool = False,
    width: int = 640,
    height: int = 480,
    legend: bool = True,
    couplings: Sequence[tuple[str, str]] = (),
):
    """Show one conformer, or all of them overlaid, in a py3Dmol view.

    Parameters
    ----------
    result : Ensemble
    conformer : int
        Index into ``result.conformers`` (0 = lowest energy).
    overlay : bool
        Overlay every conformer, superposed on the ring atoms of the lowest one; the
        chosen conformer is drawn in full and labelled, the others as thin sticks.
    show_hydrogens : {"relevant", "all", "none"} or HydrogenMode
        ``"relevant"`` draws only the axial hydrogens syn-1,3 to an axial substituent.
    torsion_labels : bool
        Label the six endocyclic torsions of each ring.
    width, height : int
        Size in pixels.
    legend : bool
        Title (energy, population) and legend drawn in the scene.
    couplings : sequence of (str, str)
        H–H pairs to label with their 3J in this conformer and the ensemble ⟨J⟩ (proton
        labels or atom indices, see :mod:`chairbuild.couplings.records`).

    Returns
    -------
    py3Dmol.view
        Displayed by Jupyter when it is the last expression of a cell.

    Raises
    ------
    InputError, OptionError
    """
    if int(width) <= 0 or int(height) <= 0:
        raise OptionError(f"width and height must be positive, got {width} x {height}")
    calls = scene_calls(
        result,
        conformer,
        overlay=overlay,
        show_hydrogens=show_hydrogens,
        torsion_labels=torsion_labels,
        legend=legend,
        height=int(height),
    )
    if couplings:
        ens = aligned_ensemble(result, reference=0)
        k = int(conformer) % len(result.conformers)
        main = k if overlay else 0
        calls = calls[:-1] + _coupling_calls(ens, k, main, couplings) + calls[-1:]
    v = _py3dmol_view(int(width), int(height))
    for name, args in calls:
        getattr(v, name)(*args)
    return v


_INLINE_MARK = "chairbuild-inline-3dmol"


def _py3dmol_view(width: int, height: int):
    """An empty py3Dmol view whose page loads the bundled 3Dmol.js, inlined (no network).

    py3Dmol's page template loads its ``js`` URL with ``loadScriptAsync('<url>')``; that
    call is replaced by :func:`chairbuild.assets.inline_loader_js` (a compressed copy,
    about 0.21 MB per view). Should the template differ, a ``data:`` URL of the whole
    build is passed instead (about 0.72 MB per view). Without the asset the view loads
    the pinned version from the CDN, with a warning.
    """
    import py3Dmol

    from chairbuild.assets import cdn_url, data_url, inline_loader_js

    loader = inline_loader_js("loadScriptAsync")
    if loader is None:
        warnings.warn(
            f"3Dmol.js was not bundled with chairbuild (npm was missing when it was installed); "
            f"this view loads it from {cdn_url()} and needs a network",
            UserWarning,
            stacklevel=3,
        )
        return py3Dmol.view(width=width, height=height, js=cdn_url())
    v = py3Dmol.view(width=width, height=height, js=_INLINE_MARK)
    call = f"loadScriptAsync('{_INLINE_MARK}')"
    if v.startjs.count(call) == 1 and "UNIQUEID" not in loader:
        v.startjs = v.startjs.replace(call, loader)
        return v
    return py3Dmol.view(width=width, height=height, js=data_url())


class ConformerBrowser:
    """Step through the conformers of an ensemble in energy order, one py3Dmol view per step.

    No widget library is needed: :meth:`next`, :meth:`prev` and :meth:`show` return a
    fresh view, which Jupyter displays when it is the last expression of a cell. Every
    view uses the same alignment, so the rings stay in place from one step to the next.

    Parameters
    ----------
    result : Ensemble
    **view_options
        Passed to :func:`view` (``show_hydrogens``, ``torsion_labels``, ``width``, ...).
    """

    def __init__(self, result: Ensemble, **view_options: Any) -> None:
        _conformer(result, 0)
        unknown = set(view_options) - {"show_hydrogens", "torsion_labels", "width", "height", "legend", "couplings"}
        if unknown:
            raise OptionError(f"unknown view option(s): {', '.join(sorted(unknown))}")
        self._result = result
        self._options = dict(view_options)
        self._index = 0

    def __len__(self) -> int:
        return len(self._result.conformers)

    @property
    def index(self) -> int:
        """Index of the conformer shown last (0 = lowest energy)."""
        return self._index

    def show(self, k: int | None = None):
        """View of conformer ``k`` (default: the current one); it becomes the current one."""
        if k is not None:
            _conformer(self._result, k)
            self._index = int(k) % len(self)
        return view(self._result, self._index, **self._options)

    def next(self):
        """View of the next conformer up in energy (wraps around to the lowest)."""
        return self.show((self._index + 1) % len(self))

    def prev(self):
        """View of the next conformer down in energy (wraps around to the highest)."""
        return self.show((self._index - 1) % len(self))

    def summary(self) -> str:
        """Title line of the current conformer."""
        return title_text(self._result, self._index)
