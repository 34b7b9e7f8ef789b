"""The XDMF sidecar, parsed with the standard library and resolved by hand with h5py.

Reference: the XDMF model and format (xdmf.org, "XDMF Model and Format", quoted
from memory): a temporal collection is a ``Grid`` with ``GridType="Collection"``
and ``CollectionType="Temporal"`` whose child grids carry a ``Time``; structured
topology dimensions count points, slowest index first; ``VXVY`` geometry lists
the x then the y coordinates; a ``HyperSlab`` data item holds a 3 x rank
selection (start, stride, count rows) followed by the source data item; HDF
data items read ``file:/dataset``.
"""

from __future__ import annotations

import xml.etree.ElementTree as ET

import h5py
import numpy as np
import pytest

from convsim.cli import main
from convsim.errors import OutputExistsError, SnapshotError
from convsim.files.reader import read_run
from convsim.files.xdmf import sidecar_path, write_xdmf


def _resolve(item, folder):
    """The array an XDMF DataItem stands for (HDF, XML or HyperSlab), by the spec."""
    dims = tuple(int(v) for v in item.get("Dimensions").split())
    if item.get("ItemType") == "HyperSlab":
        selection, source = list(item)
        rows = np.array(selection.text.split(), dtype=int).reshape(3, -1)
        data = _resolve(source, folder)
        index = tuple(slice(start, start + stride * count, stride)
                      for start, stride, count in rows.T)
        out = data[index]
        assert out.size == int(np.prod(dims))  # the values, in order, shaped by Dimensions
        return out.reshape(dims)
    if item.get("ItemType") == "Function":   # $k: the k-th child; JOIN: components side by side
        args = [_resolve(child, folder) for child in item]
        expression = item.get("Function")
        for k in range(len(args) - 1, -1, -1):
            expression = expression.replace(f"${k}", f"args[{k}]")
        join = lambda *parts: np.stack(np.broadcast_arrays(*parts), axis=-1)  # noqa: E731
        out = eval(expression.replace("JOIN", "join"), {"args": args, "join": join})
        assert out.shape == dims
        return out
    if item.get("Format") == "XML":
        return np.array(item.text.split(), dtype=float).reshape(dims)
    assert item.get("Format") == "HDF"
    file_name, dataset = item.text.strip().split(":", 1)
    with h5py.File(folder / file_name, "r") as f:
        data = f[dataset][...]
    assert data.shape == dims, (dataset, data.shape, dims)
    return data


@pytest.fixture(scope="module")
def sidecar(constant_run, tmp_path_factory):
    path = sidecar_path(constant_run)
    if not path.exists():
        write_xdmf(constant_run)
    return path


def test_sidecar_is_a_temporal_collection_naming_every_snapshot(constant_run, sidecar):
    root = ET.parse(sidecar).getroot()
    assert root.tag == "Xdmf" and root.get("Version") == "3.0"
    (collection,) = root.find("Domain").findall("Grid")
    assert collection.get("GridType") == "Collection"
    assert collection.get("CollectionType") == "Temporal"
    grids = collection.findall("Grid")
    times = read_run(constant_run).times
    assert len(grids) == len(times) >= 3
    np.testing.assert_array_equal([float(g.find("Time").get("Value")) for g in grids], times)
    assert len({g.get("Name") for g in grids}) == len(grids)


def test_sidecar_resolves_to_the_snapshot_fields(constant_run, sidecar):
    root = ET.parse(sidecar).getroot()
    grids = root.find("Domain").find("Grid").findall("Grid")
    folder = sidecar.parent
    for index, grid in enumerate(grids):
        run = read_run(constant_run, index)
        topology = grid.find("Topology")
        assert topology.get("TopologyType") == "2DRectMesh"
        points = tuple(int(v) for v in topology.get("Dimensions").split())
        assert points == (len(run.z_node), len(run.x_node))  # slowest (z) first
        geometry = grid.find("Geometry")
        assert geometry.get("GeometryType") == "VXVY"
        vx, vy = (_resolve(item, folder) for item in geometry.findall("DataItem"))
        np.testing.assert_array_equal(vx, run.x_node)
        np.testing.assert_array_equal(vy, run.z_node)
        attributes = {a.get("Name"): a for a in grid.findall("Attribute")}
        assert set(attributes) == {"temperature", "viscosity", "streamfunction", "velocity"}
        # the velocity vector at the cell centres: u = dpsi/dz, w = -dpsi/dx by central
        # differences of the corner streamfunction (exact for the face average of the scheme)
        vector = attributes.pop("velocity")
        assert vector.get("AttributeType") == "Vector" and vector.get("Center") == "Cell"
        uvw = _resolve(vector.find("DataItem"), folder)
        psi = run.fields["streamfunction"]
        dx, dz = np.diff(run.x_node)[0], np.diff(run.z_node)[0]
        u = (psi[1:, :-1] + psi[1:, 1:] - psi[:-1, :-1] - psi[:-1, 1:]) / (2 * dz)
        w = -(psi[:-1, 1:] + psi[1:, 1:] - psi[:-1, :-1] - psi[1:, :-1]) / (2 * dx)
        scale = max(np.abs(u).max(), np.abs(w).max(), 1.0)
        np.testing.assert_allclose(uvw[..., 0], u, atol=1e-12 * scale)
        np.testing.assert_allclose(uvw[..., 1], w, atol=1e-12 * scale)
        assert np.all(uvw[..., 2] == 0.0)
        for name, attribute in attributes.items():
            data = _resolve(attribute.find("DataItem"), folder)
            np.testing.assert_array_equal(data, run.fields[name])
            centre = attribute.get("Center")
            expected = points if centre == "Node" else tuple(p - 1 for p in points)
            assert centre in ("Cell", "Node") and data.shape == expected


def test_sidecar_refuses_to_overwrite_and_stays_beside_the_run(constant_run, sidecar, tmp_path):
    with pytest.raises(OutputExistsError):
        write_xdmf(constant_run)
    assert write_xdmf(constant_run, overwrite=True) == sidecar
    with pytest.raises(SnapshotError, match="folder of the run file"):
        write_xdmf(constant_run, tmp_path / "elsewhere.xdmf")


def test_xdmf_command(constant_run, tmp_path, capsys):
    import shutil
    copy = tmp_path / "copy.h5"
    shutil.copy(constant_run, copy)
    assert main(["xdmf", str(copy)]) == 0
    assert capsys.readouterr().out.strip() == str(tmp_path / "copy.xdmf")
    ET.parse(tmp_path / "copy.xdmf")
    assert main(["xdmf", str(copy)]) == 2
    assert main(["xdmf", str(copy), "--overwrite"]) == 0
    assert main(["xdmf", str(tmp_path / "missing.h5")]) == 2
