"""A sloshing water tank written the way a finite-volume solver's VTK converter lays out its output.

The scenario is invented (for tests and demos of reading real solver output):
water in a closed tank, its free surface tilting back and forth as a standing
wave, with a small splash drop flying above it. The layout is what converters
of volume-of-fluid solvers commonly write, one entry per solver step ``n``:

* ``tank_<n>.vtm``: a VTK XML multiblock file naming the pieces below;
* ``tank_<n>/internal.vtu``: the volume mesh, hexahedra one cell thick in z,
  graded (finer near the walls and the bottom);
* ``tank_<n>/boundary/walls.vtp`` and ``tank_<n>/boundary/top.vtp``: the
  boundary patches (polygon data, quads).

Each field is written twice under one name: as cell data (the solver's own
values) and as point data (each point the mean of the cells around it, as the
converters interpolate). ``alpha`` is the water volume fraction; ``U`` comes
from the stream function ``psi = A cos(w t) sin^2(pi x/L) sin^2(pi y/H)``, so
it is divergence-free and zero on every wall (the patches carry ``U = 0``).
The time is stored only in each file's field data, as a one-value
``TimeValue`` array. Step numbers such as 0, 12, 114, 132, 1000 make an order
by whole path differ from the step order.
"""

from __future__ import annotations

import os
from dataclasses import dataclass

import numpy as np

__all__ = ["TANK", "TankCase", "tank_mesh", "tank_fields", "tank_velocity", "write_vof_tank"]


@dataclass(frozen=True)
class TankCase:
    """Parameters of the sloshing tank (SI units)."""

    length: float = 1.0          # tank length along x, m
    height: float = 0.6          # tank height along y, m
    depth: float = 0.05          # thickness along z (one cell), m
    cells: tuple = (24, 16)      # cells along x and y
    fill: float = 0.3            # mean water level, m
    amplitude: float = 0.08      # surface tilt amplitude at the walls, m
    period: float = 1.2          # sloshing period, s
    stream: float = 0.02         # stream function amplitude, m^2/s
    drop_radius: float = 0.06    # splash drop radius, m
    dt: float = 0.002            # solver time step, s
    steps: tuple = (0, 12, 114, 132, 1000)
    subsamples: int = 8          # sub-samples per cell and axis for the volume fractions


#: the default case
TANK = TankCase()


def _axes(case: TankCase) -> tuple[np.ndarray, np.ndarray]:
    """Cell edges along x (finer near the walls) and y (finer near the bottom): a graded mesh."""
    nx, ny = case.cells
    sx = np.linspace(0.0, 1.0, nx + 1)
    sy = np.linspace(0.0, 1.0, ny + 1)
    x = case.length * (sx - 0.12 * np.sin(2 * np.pi * sx))
    y = case.height * np.expm1(1.2 * sy) / np.expm1(1.2)
    return x, y


def tank_mesh(case: TankCase = TANK) -> tuple[np.ndarray, np.ndarray]:
    """Points (n_points, 3) and hexahedra (n_cells, 8) in VTK corner order, cells x-fastest."""
    nx, ny = case.cells
    x, y = _axes(case)
    z = np.array([0.0, case.depth])
    zz, yy, xx = np.meshgrid(z, y, x, indexing="ij")
    points = np.column_stack([xx.ravel(), yy.ravel(), zz.ravel()])

    def pid(i, j, k):
        return (k * (ny + 1) + j) * (nx + 1) + i

    j, i = np.meshgrid(np.arange(ny), np.arange(nx), indexing="ij")
    i, j = i.ravel(), j.ravel()
    hexes = np.column_stack([pid(i, j, 0), pid(i + 1, j, 0), pid(i + 1, j + 1, 0), pid(i, j + 1, 0),
                             pid(i, j, 1), pid(i + 1, j, 1), pid(i + 1, j + 1, 1), pid(i, j + 1, 1)])
    return points, hexes.astype(np.int64)


def tank_velocity(xy: np.ndarray, time: float, case: TankCase = TANK) -> np.ndarray:
    """Velocity (n, 3) from the stream function at points ``xy`` (n, >=2): u = dpsi/dy, v = -dpsi/dx."""
    x, y = xy[:, 0], xy[:, 1]
    kx, ky = np.pi / case.length, np.pi / case.height
    a = case.stream * np.cos(2 * np.pi * time / case.period)
    u = a * np.sin(kx * x) ** 2 * ky * np.sin(2 * ky * y)
    v = -a * kx * np.sin(2 * kx * x) * np.sin(ky * y) ** 2
    return np.column_stack([u, v, np.zeros_like(u)])


def _surface(x: np.ndarray, time: float, case: TankCase) -> np.ndarray:
    tilt = case.amplitude * np.cos(2 * np.pi * time / case.period)
    return case.fill + tilt * np.cos(np.pi * x / case.length)


def _drop_centre(time: float, case: TankCase) -> tuple[float, float]:
    phase = (time / case.period) % 1.0
    return 0.2 + 0.6 * phase, case.fill + 0.19 + 0.04 * np.sin(np.pi * phase)


def tank_fields(time: float, case: TankCase = TANK) -> dict:
    """The solver's cell values and the converter's point copies of one step.

    Returns
    -------
    dict
        ``alpha_cell`` (n_cells,), ``alpha_point`` (n_points,), ``U_cell`` (n_cells, 3),
        ``U_point`` (n_points, 3); point values are the means of the cells around each point.
    """
    points, hexes = tank_mesh(case)
    s = case.subsamples
    offsets = (np.arange(s) + 0.5) / s
    lower = points[hexes[:, 0], :2]
    size = points[hexes[:, 2], :2] - lower
    xs = lower[:, 0, None, None] + size[:, 0, None, None] * offsets[None, :, None]
    ys = lower[:, 1, None, None] + size[:, 1, None, None] * offsets[None, None, :]
    xc, yc = _drop_centre(time, case)
    wet = (ys < _surface(xs, time, case)) | ((xs - xc) ** 2 + (ys - yc) ** 2 < case.drop_radius ** 2)
    alpha_cell = wet.reshape(len(hexes), -1).mean(axis=1)
    centres = points[hexes].mean(axis=1)
    u_cell = tank_velocity(centres, time, case)
    return {"alpha_cell": alpha_cell, "alpha_point": _to_points(alpha_cell, hexes, len(points)),
            "U_cell": u_cell, "U_point": _to_points(u_cell, hexes, len(points))}


def _to_points(values: np.ndarray, hexes: np.ndarray, n_points: int) -> np.ndarray:
    """The mean of the cells around each point (the converter's interpolation)."""
    flat = values.reshape(len(values), -1)
    counts = np.bincount(hexes.ravel(), minlength=n_points).astype(float)
    out = np.column_stack([np.bincount(hexes.ravel(), weights=np.repeat(flat[:, k], 8), minlength=n_points)
                           for k in range(flat.shape[1])]) / counts[:, None]
    return out.reshape((n_points,) + values.shape[1:])


def _patches(points: np.ndarray, hexes: np.ndarray, case: TankCase) -> dict:
    """Boundary quads (corner ids) and the cell each lies on, per patch: walls (left, right, bottom), top."""
    nx, ny = case.cells
    cell = np.arange(len(hexes)).reshape(ny, nx)
    sides = {"left": (cell[:, 0], [0, 3, 7, 4]), "right": (cell[:, -1], [1, 5, 6, 2]),
             "bottom": (cell[0, :], [0, 4, 5, 1]), "top": (cell[-1, :], [3, 2, 6, 7])}
    out = {}
    for patch, names in (("walls", ("left", "right", "bottom")), ("top", ("top",))):
        owners = np.concatenate([sides[n][0] for n in names])
        quads = np.concatenate([hexes[sides[n][0]][:, sides[n][1]] for n in names])
        out[patch] = (quads, owners)
    return out


def write_vof_tank(directory, *, case: TankCase = TANK, times=None, point_copy: bool = True) -> list:
    """Write the sloshing tank series as a converter lays it out (see the module notes).

    Parameters
    ----------
    directory : str or os.PathLike
        Created if missing.
    case : TankCase
    times : sequence of float, optional
        The time stored in each step's files (default: step number times ``case.dt``);
        tests give times that do not increase.
    point_copy : bool
        Also write every field as point data (the converter's interpolated copy).

    Returns
    -------
    list of str
        The ``tank_<n>.vtm`` files, in step order.
    """
    import pyvista

    directory = os.fspath(directory)
    os.makedirs(directory, exist_ok=True)
    points, hexes = tank_mesh(case)
    if times is None:
        times = [n * case.dt for n in case.steps]
    patches = _patches(points, hexes, case)
    written = []
    for number, time in zip(case.steps, times):
        fields = tank_fields(float(time), case)
        folder = os.path.join(directory, f"tank_{number}")
        os.makedirs(os.path.join(folder, "boundary"), exist_ok=True)
        grid = pyvista.UnstructuredGrid({pyvista.CellType.HEXAHEDRON: hexes}, points)
        for name in ("alpha", "U"):
            grid.cell_data[name] = fields[f"{name}_cell"]
            if point_copy:
                grid.point_data[name] = fields[f"{name}_point"]
        grid.field_data["TimeValue"] = np.array([float(time)])
        grid.save(os.path.join(folder, "internal.vtu"))
        blocks = []
        for patch, (quads, owners) in patches.items():
            used, local = np.unique(quads, return_inverse=True)
            faces = np.column_stack([np.full(len(quads), 4), local.reshape(quads.shape)]).ravel()
            poly = pyvista.PolyData(points[used], faces)
            poly.cell_data["alpha"] = fields["alpha_cell"][owners]
            poly.cell_data["U"] = np.zeros((len(quads), 3))
            poly.field_data["TimeValue"] = np.array([float(time)])
            poly.save(os.path.join(folder, "boundary", f"{patch}.vtp"))
            blocks.append(f'      <DataSet index="{len(blocks)}" name="{patch}" '
                          f'file="tank_{number}/boundary/{patch}.vtp"/>')
        vtm = os.path.join(directory, f"tank_{number}.vtm")
        with open(vtm, "w", encoding="utf-8") as handle:
            handle.write('<?xml version="1.0"?>\n'
                         '<VTKFile type="vtkMultiBlockDataSet" version="1.0" byte_order="LittleEndian">\n'
                         '  <vtkMultiBlockDataSet>\n'
                         f'    <DataSet index="0" name="internal" file="tank_{number}/internal.vtu"/>\n'
                         '    <Block index="1" name="boundary">\n'
                         + "\n".join(blocks) + "\n"
                         '    </Block>\n'
                         '  </vtkMultiBlockDataSet>\n'
                         '</VTKFile>\n')
        written.append(vtm)
    return written
