#!/usr/bin/env python3
"""Opens a voxperm .vti file with the VTK library's own XML image-data reader and prints what it
sees: dimensions, origin, spacing, every cell and field array with its components and range.

Exits non-zero when VTK reports an error while reading or an array does not have one tuple per
cell, so it can serve as an outside check of the writer. Needs the `vtk` Python package
(e.g. `python3 -m venv env && env/bin/pip install vtk numpy`); the Rust tests do not use it.

Usage: check_vtk.py FILE.vti [FILE.vti ...]
"""
import sys

import vtk
from vtk.util.numpy_support import vtk_to_numpy


class ErrorCatcher:
    """Collects VTK error events instead of letting them scroll past on stderr."""

    def __init__(self):
        self.errors = []

    def __call__(self, obj, event, message=None):
        self.errors.append(str(message) if message is not None else event)


def check(path):
    reader = vtk.vtkXMLImageDataReader()
    catcher = ErrorCatcher()
    reader.AddObserver("ErrorEvent", catcher)
    reader.GetExecutive().AddObserver("ErrorEvent", catcher)
    if not reader.CanReadFile(path):
        print(f"{path}: vtkXMLImageDataReader cannot read this file")
        return False
    reader.SetFileName(path)
    reader.Update()
    img = reader.GetOutput()
    ok = not catcher.errors
    for e in catcher.errors:
        print(f"{path}: VTK error: {e}")

    cells = img.GetNumberOfCells()
    print(f"file        {path}")
    print(f"VTK         {vtk.vtkVersion.GetVTKVersion()}")
    print(f"dimensions  {img.GetDimensions()} points, {cells} cells")
    print(f"origin      {img.GetOrigin()}")
    print(f"spacing     {img.GetSpacing()}")
    print(f"bounds      {img.GetBounds()}")

    cd = img.GetCellData()
    print(f"cell arrays {cd.GetNumberOfArrays()} (active scalars: "
          f"{cd.GetScalars().GetName() if cd.GetScalars() else None}, active vectors: "
          f"{cd.GetVectors().GetName() if cd.GetVectors() else None})")
    for i in range(cd.GetNumberOfArrays()):
        a = cd.GetArray(i)
        n = a.GetNumberOfTuples()
        comps = a.GetNumberOfComponents()
        lo, hi = a.GetRange(-1 if comps > 1 else 0)
        line = (f"  {a.GetName():<10} {a.GetDataTypeAsString():<14} components {comps} "
                f"tuples {n} range [{lo:.6g}, {hi:.6g}]")
        if comps > 1:
            per = [a.GetRange(c) for c in range(comps)]
            line += " per component " + ", ".join(f"[{l:.4g}, {h:.4g}]" for l, h in per)
            values = vtk_to_numpy(a)
            line += f" mean {', '.join(f'{m:.6g}' for m in values.mean(axis=0, dtype='float64'))}"
        print(line)
        if n != cells:
            print(f"{path}: array {a.GetName()} has {n} tuples for {cells} cells")
            ok = False

    fd = img.GetFieldData()
    print(f"field data  {fd.GetNumberOfArrays()} arrays")
    for i in range(fd.GetNumberOfArrays()):
        a = fd.GetAbstractArray(i)
        if isinstance(a, vtk.vtkStringArray):
            value = a.GetValue(0) if a.GetNumberOfValues() else ""
        else:
            value = a.GetTuple(0) if a.GetNumberOfTuples() else ()
            value = value[0] if len(value) == 1 else value
        print(f"  {a.GetName():<24} {value}")
    return ok


def main(argv):
    if len(argv) < 2:
        print(__doc__.strip().splitlines()[-1])
        return 2
    results = [check(p) for p in argv[1:]]
    return 0 if all(results) else 1


if __name__ == "__main__":
    sys.exit(main(sys.argv))
