"""Compact data of the HTML report's 3D viewer: the topology once, coordinates per conformer.

The viewer draws the SDF records that :func:`chairbuild.output.sdf_text` writes for the
:func:`~chairbuild.viewer.aligned_ensemble`, and replays the scene layers of
:func:`~chairbuild.viewer.scene_layers`. Storing that SDF and every conformer's layers as
they are (with an overlay layer per conformer that names every other conformer) made a
119-conformer report 9.1 MB. :func:`viewer_data` keeps one copy of what the conformers
share:

* ``sdf``: the exporter's record of the first conformer is the template (its lines after
  the title, up to ``M  END``: counts, atom and bond blocks); per conformer only the
  title, the coordinate fields of the atom lines (the exporter's text, 4 decimals), the
  few lines that differ otherwise (an atom's stereo parity read from its 3D geometry)
  and the property block are stored. ``cbRecord`` in :data:`PACK_JS` rebuilds record *k*
  character for character (:func:`unpack_record` is its Python twin, used to check each
  packing); records with another number of lines keep all records verbatim.
* ``single``: each conformer's single-conformer layers, with every repeated 3Dmol.js
  call, label style and legend entry stored once in ``pool``; a label keeps its text and
  anchor only.
* ``overlay``: what the overlay adds (heavy atoms, colours, titles); ``cbOverlay``
  derives each overlay layer from the single one, the way ``scene_layers(overlay=True)``
  builds it.

``cbSdf``, ``cbLayer`` and ``cbOverlay`` are the JavaScript side; keep them in step with
this module and with :mod:`chairbuild.viewer` (a Node.js test compares them).
"""

from __future__ import annotations

import json
from typing import Any, Sequence

from chairbuild.result import Ensemble

__all__ = ["viewer_data", "pack_sdf", "unpack_record", "pack_layers", "PACK_JS"]

_END = "\nM  END\n"
_RECORD_END = "$$$$\n"
_FIRST_ATOM_LINE = 3  # in the template: program line, comment line, counts line, then the atoms
_FIELD = 10  # width of one V2000 coordinate field


def _records(text: str) -> list[str] | None:
    pieces = text.split(_RECORD_END)
    if pieces[-1] != "":
        return None
    return [p + _RECORD_END for p in pieces[:-1]]


def _split(record: str) -> tuple[str, list[str], str] | None:
    """(title, lines after the title up to M  END, property block) of one V2000 record."""
    end = record.find(_END)
    if end < 0:
        return None
    mol = record[:end]
    lines = mol.split("\n")
    if len(lines) < 4 or not lines[3].rstrip().endswith("V2000"):
        return None
    return lines[0], lines[1:] + ["M  END"], record[end + len(_END) : -len(_RECORD_END)]


def pack_sdf(text: str) -> dict[str, Any]:
    """The exporter's multi-record SDF as one template plus per-record titles, coordinates and properties.

    Returns ``{"records": [...]}`` (verbatim) when the records do not share one V2000
    template that differs only in those parts.
    """
    records = _records(text)
    verbatim = {"records": records if records is not None else [text]}
    if not records:
        return verbatim
    first = _split(records[0])
    if first is None:
        return verbatim
    head = first[1]
    try:
        n_atoms = int(head[2][:3])
    except ValueError:
        return verbatim
    atoms = range(_FIRST_ATOM_LINE, _FIRST_ATOM_LINE + n_atoms)
    packed: dict[str, Any] = {
        "head": head, "atoms": [_FIRST_ATOM_LINE, n_atoms], "title": [], "xyz": [], "lines": [], "tail": []
    }
    for record in records:
        parts = _split(record)
        if parts is None or len(parts[1]) != len(head):
            return verbatim
        title, lines, tail = parts
        tokens: list[str] = []
        other: list[list[Any]] = []  # whole lines that differ from the template beyond the coordinates
        for i, (line, ref) in enumerate(zip(lines, head)):
            if i in atoms:
                tokens += [line[j * _FIELD : (j + 1) * _FIELD].strip() for j in range(3)]
                if line[3 * _FIELD :] != ref[3 * _FIELD :]:
                    other.append([i, line])
            elif line != ref:
                other.append([i, line])
        packed["title"].append(title)
        packed["xyz"].append(" ".join(tokens))
        packed["lines"].append(other)
        packed["tail"].append(tail)
    if any(unpack_record(packed, k) != rec for k, rec in enumerate(records)):
        return verbatim
    return packed


def unpack_record(packed: dict[str, Any], k: int) -> str:
    """Record ``k`` of a :func:`pack_sdf` result (Python twin of ``cbRecord``)."""
    if "records" in packed:
        return packed["records"][k]
    lines = list(packed["head"])
    first, count = packed["atoms"]
    xyz = packed["xyz"][k].split(" ")
    for i in range(count):
        line = lines[first + i]
        lines[first + i] = "".join(v.rjust(_FIELD) for v in xyz[3 * i : 3 * i + 3]) + line[3 * _FIELD :]
    for i, line in packed["lines"][k]:
        lines[i] = line
    return packed["title"][k] + "\n" + "\n".join(lines) + "\n" + packed["tail"][k] + _RECORD_END


class _Pool:
    """Distinct JSON values, each stored once; :meth:`ref` gives a value's index."""

    def __init__(self) -> None:
        self.values: list[Any] = []
        self._index: dict[str, int] = {}

    def ref(self, value: Any) -> int:
        key = json.dumps(value, sort_keys=True, separators=(",", ":"))
        if key not in self._index:
            self._index[key] = len(self.values)
            self.values.append(value)
        return self._index[key]


def _pack_label(call: Sequence[Any], pool: _Pool) -> Any:
    """``[text, x, y, z, style ref]`` for an anchored addLabel call, else the call's pool ref."""
    name, args = call
    if name == "addLabel" and len(args) == 2 and isinstance(args[1], dict):
        spec = dict(args[1])
        pos = spec.pop("position", None)
        if isinstance(pos, dict) and set(pos) == {"x", "y", "z"}:
            return [args[0], pos["x"], pos["y"], pos["z"], pool.ref(spec)]
    return pool.ref([name, args])


_PACKED_KEYS = ("styles", "labels", "torsions", "legend")


def pack_layers(layers: Sequence[dict[str, Any]]) -> tuple[list[Any], list[dict[str, Any]]]:
    """(pool, packed layers) of a list of :func:`~chairbuild.viewer.scene_layers` results.

    ``styles`` become lists of pool refs per mode, ``labels`` and ``torsions`` anchored
    labels (:func:`_pack_label`), ``legend`` pool refs; other keys are kept as they are.
    ``cbLayer`` in :data:`PACK_JS` expands one packed layer back.
    """
    pool = _Pool()
    out = []
    for layer in layers:
        packed = {k: v for k, v in layer.items() if k not in _PACKED_KEYS}
        packed["styles"] = {mode: [pool.ref(c) for c in calls] for mode, calls in layer["styles"].items()}
        packed["labels"] = [_pack_label(c, pool) for c in layer["labels"]]
        packed["torsions"] = [_pack_label(c, pool) for c in layer["torsions"]]
        packed["legend"] = [pool.ref(e) for e in layer["legend"]]
        out.append(packed)
    return pool.values, out


def viewer_data(ens: Ensemble, height: int, file_name: str) -> dict[str, Any]:
    """Everything the report's viewer of one ensemble reads (JSON-able; see the module notes)."""
    from chairbuild.output import sdf_text
    from chairbuild.viewer import aligned_ensemble, compose_config, overlay_config, overlay_title, scene_layers

    aligned = aligned_ensemble(ens, reference=0)
    n = len(ens.conformers)
    pool, single = pack_layers([scene_layers(ens, k, overlay=False, aligned=aligned) for k in range(n)])
    overlay = overlay_config()
    overlay["heavy"] = [i for i, s in enumerate(aligned.symbols) if s != "H"]
    overlay["titles"] = [overlay_title(ens, k) for k in range(n)]
    return {
        "n": n,
        "height": height,
        "sdf": pack_sdf(sdf_text(aligned)),
        "file_name": file_name,
        "config": compose_config(),
        "pool": pool,
        "single": single,
        "overlay": overlay,
    }


#: JavaScript side of this module: cbRecord/cbSdf (SDF), cbLayer (one layer), cbOverlay.
PACK_JS = r"""
function cbRecord(S, k) {
  if (S.records) return S.records[k];
  var lines = S.head.slice(), xyz = S.xyz[k].split(" "), first = S.atoms[0];
  for (var i = 0; i < S.atoms[1]; i++) {
    var line = lines[first + i];
    lines[first + i] = xyz[3 * i].padStart(10) + xyz[3 * i + 1].padStart(10) + xyz[3 * i + 2].padStart(10) + line.slice(30);
  }
  S.lines[k].forEach(function (d) { lines[d[0]] = d[1]; });
  return S.title[k] + "\n" + lines.join("\n") + "\n" + S.tail[k] + "$$$$\n";
}
function cbSdf(S) {
  if (S.records) return S.records.join("");
  var out = [];
  for (var k = 0; k < S.title.length; k++) out.push(cbRecord(S, k));
  return out.join("");
}
function cbLayer(P, pool) {
  function get(i) { return JSON.parse(JSON.stringify(pool[i])); }  // a fresh copy: 3Dmol.js may keep it
  function label(x) {
    if (typeof x === "number") return get(x);
    return ["addLabel", [x[0], Object.assign({position: {x: x[1], y: x[2], z: x[3]}}, get(x[4]))]];
  }
  var L = Object.assign({}, P);
  L.styles = {};
  Object.keys(P.styles).forEach(function (m) { L.styles[m] = P.styles[m].map(get); });
  L.labels = P.labels.map(label);
  L.torsions = P.torsions.map(label);
  L.legend = P.legend.map(get);
  return L;
}
function cbOverlay(L, k, n, ov) {
  var O = Object.assign({}, L), others = [];
  O.models = [];
  for (var m = 0; m < n; m++) O.models.push(m);
  O.main = k;
  O.title = ov.titles[k];
  for (var pos = 0; pos < n; pos++) {
    if (pos === k) continue;
    others.push(["setStyle", [{model: pos}, {}]]);
    others.push(["setStyle", [{model: pos, index: ov.heavy},
      {stick: {radius: ov.radius, color: ov.colours[pos % ov.colours.length], opacity: ov.opacity}}]]);
  }
  O.styles = {};
  Object.keys(L.styles).forEach(function (mode) {
    O.styles[mode] = L.styles[mode].map(function (c) {
      return [c[0], [Object.assign({}, c[1][0], {model: k})].concat(c[1].slice(1))];
    }).concat(others);
  });
  return O;
}
"""
