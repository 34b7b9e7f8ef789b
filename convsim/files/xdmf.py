"""XDMF sidecar of a run file, so that ParaView and VisIt open its time series.

``write_xdmf("runs/case.h5")`` writes ``runs/case.xdmf`` beside it: light XML
that describes the heavy data, which stays in the HDF5 run file and is
referenced there by dataset path (``case.h5:/temperature``; the path is
relative, so the pair can be moved together).

Layout (XDMF 3)::

    Xdmf Version="3.0"
      Domain
        Grid  GridType="Collection" CollectionType="Temporal"
          Grid  GridType="Uniform"   (one per snapshot)
            Time Value="t"
            Topology  TopologyType="2DRectMesh" Dimensions="nz+1 nx+1"
            Geometry  GeometryType="VXVY"   -> /x_node, /z_node (cell corners)
            Attribute temperature    Center="Cell" -> hyperslab of /temperature
            Attribute viscosity      Center="Cell" -> hyperslab of /viscosity
            Attribute streamfunction Center="Node" -> hyperslab of /streamfunction
            Attribute strain_rate, stress, yielded  Center="Cell" (where the law yields)

The structured-mesh ``Dimensions`` count points, slowest index first (z, then
x), matching the [z, x] layout of the arrays; the model's z is the viewer's y.
Each attribute is one snapshot of a (time, ...) dataset, picked by a
``HyperSlab`` data item whose first child gives start, stride and count per
dimension.  Times are the nondimensional snapshot times (d^2/kappa).
Velocities live on cell faces, which XDMF cannot describe directly; the sidecar
gives the cell-centre velocity vector (u, w, 0), u = (u_west + u_east)/2 and
w = (w_south + w_north)/2, as a ``Function`` data item that joins four
hyperslabs of the face arrays, so that ParaView draws glyphs and streamlines
without a filter::

            Attribute velocity  AttributeType="Vector" Center="Cell"
              DataItem ItemType="Function"
                       Function="JOIN(0.5*($0 + $1), 0.5*($2 + $3), 0.0*$0)"
                -> /velocity_x columns 0..nx-1 and 1..nx, /velocity_z rows 0..nz-1 and 1..nz
"""

from __future__ import annotations

import xml.etree.ElementTree as ET
from pathlib import Path


from convsim.errors import DiskFullError, SnapshotError
from convsim.files.atomic import atomic_write_text
from convsim.files.commit import fault_point, is_disk_full
from convsim.files.reader import reading_run_file
from convsim.files.runfile import check_writable
from convsim.model.fields import ADVECTED, DERIVED

__all__ = ["write_xdmf", "xdmf_text", "sidecar_path", "XDMF_FIELDS"]

#: Snapshot fields described in the sidecar: name -> XDMF centre (and every advected or
#: derived field the run file holds, at the cells: ``convsim.model.fields.ADVECTED``,
#: ``DERIVED``: the strain rate, stress and yielded flag of a law that yields).
XDMF_FIELDS = {"temperature": "Cell", "viscosity": "Cell", "streamfunction": "Node"}


def _described(f) -> dict:
    """The fields of an open run file the sidecar describes: name -> centre."""
    advected = {name: "Cell" for name in ADVECTED if name in f}
    derived = {name: "Cell" for name in DERIVED if name in f}
    return {**advected, **{k: v for k, v in XDMF_FIELDS.items() if k in f}, **derived}


def sidecar_path(run_path: str | Path) -> Path:
    """``RUN.xdmf`` beside ``RUN.h5``."""
    return Path(run_path).with_suffix(".xdmf")


def _data_item(parent, dims, href, dtype):
    item = ET.SubElement(parent, "DataItem", Dimensions=" ".join(str(d) for d in dims),
                         NumberType="Int" if dtype.kind in "iu" else "Float",
                         Precision=str(dtype.itemsize), Format="HDF")
    item.text = href
    return item


def xdmf_text(run_path: str | Path) -> str:
    """The XDMF 3 document (text) describing the snapshots of a run file."""
    run_path = Path(run_path)
    name = run_path.name
    with reading_run_file(run_path) as f:
        times = f["time"][:]
        nx1, nz1 = len(f["x_node"]), len(f["z_node"])
        coord_types = {k: f[k].dtype for k in ("x_node", "z_node")}
        described = _described(f)
        shapes = {k: f[k].shape for k in described}
        types = {k: f[k].dtype for k in described}
        title = f.attrs.get("title", "convsim run")
        faces = {k: (f[k].shape, f[k].dtype) for k in ("velocity_x", "velocity_z")}
    if isinstance(title, bytes):
        title = title.decode()

    root = ET.Element("Xdmf", Version="3.0")
    root.set("xmlns:xi", "http://www.w3.org/2001/XInclude")
    domain = ET.SubElement(root, "Domain")
    series = ET.SubElement(domain, "Grid", Name=str(title) or "convsim run",
                           GridType="Collection", CollectionType="Temporal")
    for index, t in enumerate(times):
        grid = ET.SubElement(series, "Grid", Name=f"snapshot {index}", GridType="Uniform")
        ET.SubElement(grid, "Time", Value=repr(float(t)))
        ET.SubElement(grid, "Topology", TopologyType="2DRectMesh", Dimensions=f"{nz1} {nx1}")
        geometry = ET.SubElement(grid, "Geometry", GeometryType="VXVY")
        _data_item(geometry, (nx1,), f"{name}:/x_node", coord_types["x_node"])
        _data_item(geometry, (nz1,), f"{name}:/z_node", coord_types["z_node"])
        for field, centre in described.items():
            shape = shapes[field]  # (time, rows, columns)
            attribute = ET.SubElement(grid, "Attribute", Name=field, AttributeType="Scalar",
                                      Center=centre)
            slab = ET.SubElement(attribute, "DataItem", ItemType="HyperSlab",
                                 Dimensions=f"{shape[1]} {shape[2]}", Type="HyperSlab")
            selection = ET.SubElement(slab, "DataItem", Dimensions="3 3", NumberType="Int",
                                      Format="XML")
            selection.text = f"{index} 0 0  1 1 1  1 {shape[1]} {shape[2]}"
            _data_item(slab, shape, f"{name}:/{field}", types[field])
        _velocity_vector(grid, index, name, faces)
    ET.indent(root, space="  ")
    return ('<?xml version="1.0" encoding="utf-8"?>\n<!DOCTYPE Xdmf SYSTEM "Xdmf.dtd" []>\n'
            + ET.tostring(root, encoding="unicode") + "\n")


def _velocity_vector(grid, index: int, name: str, faces: dict) -> None:
    """The cell-centre velocity (u, w, 0) of snapshot ``index`` as a Function attribute."""
    (_, nz, nx1), ux_type = faces["velocity_x"]
    nx = nx1 - 1
    attribute = ET.SubElement(grid, "Attribute", Name="velocity", AttributeType="Vector",
                              Center="Cell")
    function = ET.SubElement(attribute, "DataItem", ItemType="Function",
                             Function="JOIN(0.5*($0 + $1), 0.5*($2 + $3), 0.0*$0)",
                             Dimensions=f"{nz} {nx} 3")
    for field, (row, column) in (("velocity_x", (0, 0)), ("velocity_x", (0, 1)),
                                 ("velocity_z", (0, 0)), ("velocity_z", (1, 0))):
        shape, dtype = faces[field]
        slab = ET.SubElement(function, "DataItem", ItemType="HyperSlab",
                             Dimensions=f"{nz} {nx}", Type="HyperSlab")
        selection = ET.SubElement(slab, "DataItem", Dimensions="3 3", NumberType="Int",
                                  Format="XML")
        selection.text = f"{index} {row} {column}  1 1 1  1 {nz} {nx}"
        _data_item(slab, shape, f"{name}:/{field}", dtype)


def write_xdmf(run_path: str | Path, output: str | Path | None = None, *,
               overwrite: bool = False) -> Path:
    """Write the XDMF sidecar of a run file (default ``RUN.xdmf`` beside it).

    Parameters
    ----------
    run_path : path
        The HDF5 run file.
    output : path, optional
        Where to write; must be in the run file's folder, because the data are
        referenced by a path relative to the sidecar.
    overwrite : bool
        Replace an existing sidecar.  The run writer passes True: the sidecar
        belongs to its run file and follows it.

    Returns
    -------
    Path
        The file written.
    """
    run_path = Path(run_path)
    output = sidecar_path(run_path) if output is None else Path(output)
    if output.resolve().parent != run_path.resolve().parent:
        raise SnapshotError(f"XDMF output {str(output)!r}: must be in the folder of the run file "
                            f"{str(run_path)!r} (the data are referenced by relative path)")
    text = xdmf_text(run_path)
    check_writable(output, overwrite, other="")    # `convsim xdmf` has no --out
    try:
        fault_point("xdmf")
        atomic_write_text(output, text)
    except OSError as exc:
        kind = DiskFullError if is_disk_full(exc, output.parent) else SnapshotError
        raise kind(f"XDMF sidecar {str(output)!r}: cannot be written ({exc.strerror or exc}); "
                   f"the run file is complete, write the sidecar later with: convsim xdmf "
                   f"{str(run_path)!r}") from None
    return output
