#!/usr/bin/env python3
"""Independent read-back of octocut's VTK XML output with VTK's own readers.

Usage: vtk_readback.py CASE_DIR [CASE_DIR...]
Each CASE_DIR holds mesh.vtu, boundary.vtp and expected.json
({"cells", "fluid_volume", "boundary_faces", "boundary_area", "tag_names"}).

Checks (reference: the VTK library itself):
- VTK reads both files without error; the cell and polygon counts are the expected ones;
- the sum of VTK's own cell volumes equals the expected fluid volume within 1e-9 relative:
  vtkCellSizeFilter for hexahedra; for polyhedra the cell's faces are triangulated and measured
  with vtkMassProperties (vtkCellSizeFilter would measure a non-convex polyhedron's hull);
- the boundary surface, triangulated, has the expected area and encloses the fluid volume
  (vtkMassProperties), within 1e-9 relative;
- the FieldData string array `tag_names` holds the expected patch names and every polygon's
  `tag` indexes it.
"""
import json
import sys

from vtkmodules.vtkCommonCore import vtkCommand, vtkIdList, vtkPoints
from vtkmodules.vtkCommonDataModel import VTK_HEXAHEDRON, VTK_POLYHEDRON, vtkCellArray, vtkPolyData
from vtkmodules.vtkFiltersCore import vtkMassProperties, vtkTriangleFilter
from vtkmodules.vtkFiltersVerdict import vtkCellSizeFilter
from vtkmodules.vtkIOXML import vtkXMLPolyDataReader, vtkXMLUnstructuredGridReader

REL = 1e-9


class ErrorCatcher:
    def __init__(self):
        self.errors = []

    def __call__(self, obj, event):
        self.errors.append(f"{obj.GetClassName()}: {event}")


def read(reader_cls, path):
    r = reader_cls()
    catcher = ErrorCatcher()
    r.AddObserver(vtkCommand.ErrorEvent, catcher)
    r.SetFileName(path)
    r.Update()
    if catcher.errors or r.GetErrorCode() != 0:
        raise AssertionError(f"VTK failed to read {path}: {catcher.errors}")
    return r.GetOutput()


def close(a, b, what):
    scale = max(abs(a), abs(b), 1e-300)
    if abs(a - b) > REL * scale:
        raise AssertionError(f"{what}: {a!r} vs expected {b!r} (rel {abs(a - b) / scale:.3e})")


def mass(poly):
    tri = vtkTriangleFilter()
    tri.SetInputData(poly)
    tri.Update()
    m = vtkMassProperties()
    m.SetInputData(tri.GetOutput())
    m.Update()
    return m


def polyhedron_volume(grid, i):
    cell = grid.GetCell(i)
    pts = vtkPoints()
    pts.SetDataTypeToDouble()  # the default (float32) loses the 1e-9 agreement
    ids = vtkIdList()
    grid.GetCellPoints(i, ids)
    local = {}
    for k in range(ids.GetNumberOfIds()):
        local[ids.GetId(k)] = k
        pts.InsertNextPoint(grid.GetPoint(ids.GetId(k)))
    polys = vtkCellArray()
    for f in range(cell.GetNumberOfFaces()):
        face = cell.GetFace(f)
        fids = face.GetPointIds()
        polys.InsertNextCell(fids.GetNumberOfIds())
        for k in range(fids.GetNumberOfIds()):
            polys.InsertCellPoint(local[fids.GetId(k)])
    pd = vtkPolyData()
    pd.SetPoints(pts)
    pd.SetPolys(polys)
    return mass(pd).GetVolume()


def check(case):
    with open(f"{case}/expected.json") as f:
        exp = json.load(f)
    grid = read(vtkXMLUnstructuredGridReader, f"{case}/mesh.vtu")
    n = grid.GetNumberOfCells()
    assert n == exp["cells"], f"cells: {n} vs {exp['cells']}"
    for name in ("level", "cut", "region", "volume"):
        assert grid.GetCellData().GetArray(name) is not None, f"missing cell array {name}"

    sizes = vtkCellSizeFilter()
    sizes.SetInputData(grid)
    sizes.ComputeVolumeOn()
    sizes.Update()
    vol_arr = sizes.GetOutput().GetCellData().GetArray("Volume")
    total = 0.0
    n_hex = n_poly = 0
    for i in range(n):
        t = grid.GetCellType(i)
        if t == VTK_HEXAHEDRON:
            total += vol_arr.GetValue(i)
            n_hex += 1
        elif t == VTK_POLYHEDRON:
            total += polyhedron_volume(grid, i)
            n_poly += 1
        else:
            raise AssertionError(f"cell {i}: unexpected type {t}")
    close(total, exp["fluid_volume"], "sum of VTK cell volumes")

    bnd = read(vtkXMLPolyDataReader, f"{case}/boundary.vtp")
    assert bnd.GetNumberOfPolys() == exp["boundary_faces"], "boundary polygon count"
    m = mass(bnd)
    close(m.GetSurfaceArea(), exp["boundary_area"], "boundary area")
    close(m.GetVolume(), exp["fluid_volume"], "volume enclosed by the boundary")
    names_arr = bnd.GetFieldData().GetAbstractArray("tag_names")
    assert names_arr is not None, "no tag_names field array"
    names = [names_arr.GetValue(k) for k in range(names_arr.GetNumberOfValues())]
    assert names == exp["tag_names"], f"tag names {names} vs {exp['tag_names']}"
    tags = bnd.GetCellData().GetArray("tag")
    for k in range(tags.GetNumberOfTuples()):
        assert 0 <= int(tags.GetValue(k)) < len(names), f"polygon {k}: tag out of range"
    print(f"ok {case}: {n} cells ({n_hex} hexahedra, {n_poly} polyhedra), volume {total:.12g}, "
          f"{len(names)} tags")


def main():
    if len(sys.argv) < 2:
        sys.exit(__doc__)
    for case in sys.argv[1:]:
        check(case.rstrip("/"))


if __name__ == "__main__":
    main()
