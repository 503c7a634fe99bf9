"""Column fingerprints of the tables ``measure`` and ``compare`` write for a fixed set of runs.

The refactoring guard of the package layout: every table must come out bit for bit the same on
triangle, tetrahedron and regular-grid meshes when code only moves. Each column is fingerprinted
on its own (SHA-256 of its values as float64, or of its text), so a new column does not disturb
the others and a changed one is named.

Regenerate the committed file after an intended change of results, and say why in the commit:

    PYTHONPATH=src python tests/run/table_fingerprints.py > tests/run/table_fingerprints.json
"""

from __future__ import annotations

import hashlib
import json
import os
import sys
import tempfile

import numpy as np

ROOT = os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__))))
SAMPLES = os.path.join(ROOT, "sample_fields")


def column_fingerprints(frame) -> dict:
    """SHA-256 (16 hex digits) of each column of a DataFrame."""
    out = {}
    for name in frame.columns:
        values = frame[name]
        try:
            data = np.ascontiguousarray(values.to_numpy(dtype=np.float64)).tobytes()
        except (TypeError, ValueError):
            data = "\x1f".join(str(v) for v in values).encode()
        out[str(name)] = hashlib.sha256(data).hexdigest()[:16]
    return out


def tetra_series(folder: str) -> str:
    """Three steps of two diffuse spheres drifting apart on a tetrahedral box (written with meshio)."""
    import meshio

    from phasegauge.meshgen import grid_mesh, to_meshio

    mesh = grid_mesh((12, 12, 12), ((0, 1), (0, 1), (0, 1)), kind="tetra")
    x = mesh.points
    os.makedirs(folder, exist_ok=True)
    for k in range(3):
        shift = 0.04 * k
        r1 = np.linalg.norm(x - (0.3 - shift, 0.5, 0.5), axis=1)
        r2 = np.linalg.norm(x - (0.7 + shift, 0.5, 0.5), axis=1)
        phi = np.maximum(np.tanh((0.18 - r1) / 0.05), np.tanh((0.15 - r2) / 0.05))
        m = to_meshio(mesh, point_data={"phi": phi}, field_data={"TimeValue": np.array([0.1 * k])})
        meshio.write(os.path.join(folder, f"spheres_{k:02d}.vtu"), m)
    return folder


def fingerprints() -> dict:
    """Run the fixed cases and fingerprint every table they give."""
    from phasegauge import measure
    from phasegauge.run.compare import RunSpec, compare_runs

    cases = {}
    with tempfile.TemporaryDirectory() as tmp:
        runs = {
            "triangles_filament": (os.path.join(SAMPLES, "filament_breakup.xdmf"),
                                   dict(field="phi", range=(-1, 1), periodic=("x", "y"))),
            "triangles_channel": (os.path.join(SAMPLES, "channel_mixing", "flow_rate_1.xdmf"),
                                  dict(field="c", velocity="velocity", section_axis="x", section_count=11)),
            "grid_vortex_sharp": (os.path.join(SAMPLES, "vortex_sharp"),
                                  dict(field="c", velocity="velocity")),
            "tetra_spheres": (tetra_series(os.path.join(tmp, "tetra")), dict(field="phi", range=(-1, 1))),
        }
        for name, (path, opts) in runs.items():
            res = measure(path, **opts)
            cases[name] = {table: column_fingerprints(getattr(res, table))
                           for table in ("steps", "droplets", "events", "profiles")}
            cases[name]["audit"] = column_fingerprints(
                __import__("pandas").DataFrame([{k: v for k, v in res.audit.items()
                                                 if isinstance(v, (int, float, bool))}]))
        cmp = compare_runs(RunSpec(os.path.join(SAMPLES, "vortex_sharp"), "c", label="sharp"),
                           RunSpec(os.path.join(SAMPLES, "vortex_upwind"), "c", label="upwind"))
        cases["grid_compare"] = {"comparison": column_fingerprints(cmp.comparison)}
    return cases


if __name__ == "__main__":
    sys.path.insert(0, os.path.join(ROOT, "src"))
    json.dump(fingerprints(), sys.stdout, indent=1, sort_keys=True)
    print()
