"""Contour + width on ~1M cells against pyvista's contour filter alone.

Run: PYTHONPATH=src python benchmarks/bench_interface.py [--kinds tetra,grid] [--cells N] [--repeat 3]

Meshes: ``tetra`` (a grid of cubes split in 6 tetrahedra, 55 per side: 998 250 cells) and
``grid`` (regular hexahedra, 100 per side: 1M cells); ``--cells`` overrides the cells per
side of both. Point data: a diffuse sphere of radius 0.3, logistic eps = 1.5 cells.

Both run in this process on the same mesh and point data. Mesh-only work (coordinates, cell
sizes, face numbering) is cached on the mesh as in a series, so after one cold run the warm
runs give the per-step figure: best of ``--repeat``. Printed per mesh: seconds for
``find_interface`` and ``interface_metrics`` (and their sum), pyvista's contour, the ratio
(ours / pyvista; below 1 the whole interface analysis is faster than VTK's contour alone),
and where the metrics' time goes (cumulative seconds of their parts, from one profiled run).
"""

from __future__ import annotations

import argparse
import cProfile
import pstats
import time

import numpy as np

def _best(job, repeat: int) -> tuple[float, object]:
    best, result = float("inf"), None
    for _ in range(repeat):
        start = time.perf_counter()
        result = job()
        best = min(best, time.perf_counter() - start)
    return best, result


def _parts(job) -> dict:
    """Cumulative seconds of the main parts of interface_metrics in one profiled run of ``job``."""
    from phasegauge.analysis import _profile_fits, _signed_distance, _width_integrals as integrals
    from phasegauge.model import corners, simplices

    parts = {"integrals (split path)": integrals._SplitBand.__init__,
             "  of which the simplex split": simplices.split_cells,
             "integrals (grid path)": integrals._GridBand.__init__,
             "signed distances": _signed_distance._signed_distance,
             "  of which k-d tree queries": _signed_distance._nearest_plane_distance,
             "second moment (split path)": integrals._SplitBand.moments,
             "second moment (grid path)": integrals._GridBand.moments,
             "profile fits": _profile_fits._profile_table,
             "cell gradients": corners.cell_gradient}
    profile = cProfile.Profile()
    profile.enable()
    job()
    profile.disable()
    stats = pstats.Stats(profile).stats
    out = {}
    for label, function in parts.items():
        code = function.__code__
        entry = stats.get((code.co_filename, code.co_firstlineno, code.co_name))
        if entry is not None:
            out[label] = entry[3]
    return out


def run(kind: str, n: int, repeat: int) -> None:
    import pyvista

    from phasegauge.analysis.interface import find_interface, interface_metrics
    from phasegauge.meshgen import grid_mesh, to_meshio

    pyvista.OFF_SCREEN = True
    mesh = grid_mesh((n, n, n), kind="tetra" if kind == "tetra" else "hexahedron")
    d = np.linalg.norm(mesh.coordinates - 0.5, axis=1)
    eps = 1.5 / n
    c = 0.5 * (1 + np.tanh((0.3 - d) / (2 * eps)))
    grid = pyvista.from_meshio(to_meshio(mesh, point_data={"c": c}))

    def contour_and_width():
        contour, extremes = find_interface(mesh, c, return_extremes=True)
        return contour, interface_metrics(mesh, c, contour=contour, extremes=extremes)

    start = time.perf_counter()
    contour_and_width()
    cold = time.perf_counter() - start
    t_find, (contour, extremes) = _best(lambda: find_interface(mesh, c, return_extremes=True), repeat)
    t_metrics, metrics = _best(lambda: interface_metrics(mesh, c, contour=contour, extremes=extremes), repeat)
    t_both, _ = _best(contour_and_width, repeat)
    t_vtk, surface = _best(lambda: grid.contour([0.5], scalars="c"), repeat)
    vtk_area = float(surface.compute_cell_sizes(length=False, volume=False).cell_data["Area"].sum())
    print(f"{kind}: {mesh.n_cells} cells, {mesh.n_points} points"
          f"{' (regular grid)' if mesh.regular_grid is not None else ''}")
    print(f"  ours, first run (mesh caches built)  {cold:7.3f} s")
    print(f"  find_interface                       {t_find:7.3f} s   area {contour.size:.6f}")
    print(f"  interface_metrics                    {t_metrics:7.3f} s")
    print(f"  contour + width                      {t_both:7.3f} s")
    print(f"  pyvista contour                      {t_vtk:7.3f} s   area {vtk_area:.6f}")
    print(f"  ratio contour+width / pyvista contour: {t_both / t_vtk:.1f}")
    print(f"  exact sphere area {4 * np.pi * 0.09:.6f}; interface_width {metrics['interface_width']:.5f} "
          f"(5.889 eps = {2 * np.log(19) * eps:.5f})")
    print("  parts of interface_metrics (one profiled run, cumulative s):")
    for label, seconds in _parts(lambda: interface_metrics(mesh, c, contour=contour, extremes=extremes)).items():
        print(f"    {label:34s} {seconds:7.3f}")


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--kinds", default="tetra,grid", help="comma-separated: tetra, grid")
    parser.add_argument("--cells", type=int, default=None, help="cells per side (default 55 tetra, 100 grid)")
    parser.add_argument("--repeat", type=int, default=3, help="warm runs; the best is printed")
    args = parser.parse_args()
    for kind in args.kinds.split(","):
        run(kind, args.cells or (55 if kind == "tetra" else 100), args.repeat)


if __name__ == "__main__":
    main()
