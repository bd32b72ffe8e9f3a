"""Meshes and URDF collision elements: conservative enclosures (every point of the mesh surface,
sampled with trimesh.sample, lies inside the checked shape), STL binary and ASCII, package://
paths, and bad input (one line each)."""
import os
import struct
import textwrap

import numpy as np
import pytest
import trimesh

from workbench.arm import ArmFileError, read_arm_model
from workbench.arm.meshes import MAX_TRIANGLES, mesh_shape
from workbench.collision import kernels as K
from workbench.collision import shape_rows

RNG = np.random.default_rng(7)


def _inside_margin(shape, pts):
    """Signed distance of points to the checked shape (capsule part and box part; <= 0 inside)."""
    t, row = shape_rows(shape)
    caps = np.array([K.seg_seg(*row[0:3], *row[3:6], *p, *p) - row[6] for p in pts])
    P = row[None].copy()
    boxd = np.array([K.point_box(p[0], p[1], p[2], P, 0) for p in pts])
    return np.maximum(caps, boxd)


@pytest.mark.parametrize("kind", ["box", "cylinder", "capsule", "icosphere", "random"])
def test_mesh_enclosure_contains_the_mesh_surface(tmp_path, kind):
    if kind == "box":
        m = trimesh.creation.box(extents=[0.3, 0.1, 0.05])
    elif kind == "cylinder":
        m = trimesh.creation.cylinder(radius=0.05, height=0.4, sections=24)
    elif kind == "capsule":
        m = trimesh.creation.capsule(height=0.3, radius=0.04)
    elif kind == "icosphere":
        m = trimesh.creation.icosphere(subdivisions=2, radius=0.1)
    else:
        m = trimesh.convex.convex_hull(RNG.normal(size=(60, 3)) * [0.2, 0.05, 0.1])
    R = trimesh.transformations.random_rotation_matrix(RNG.random(3))
    m.apply_transform(R)
    f = tmp_path / "part.stl"
    m.export(f)
    origin = np.eye(4)
    origin[:3, 3] = [0.1, -0.2, 0.3]
    shp = mesh_shape(str(f), [1, 1, 1], origin, where="test")
    m = trimesh.load(f)  # the mesh as stored (STL keeps float32 coordinates)
    pts, _ = trimesh.sample.sample_surface(m, 4000, seed=1)
    pts = np.vstack([pts, m.vertices]) + origin[:3, 3]
    margin = _inside_margin(shp, pts)
    assert margin.max() <= 1e-9
    assert shp.volume_ratio >= 1.0 - 1e-9


def test_ascii_and_binary_stl_give_the_same_enclosure(tmp_path):
    m = trimesh.creation.cylinder(radius=0.05, height=0.2, sections=12)
    b = tmp_path / "b.stl"
    a = tmp_path / "a.stl"
    m.export(b)
    a.write_text(trimesh.exchange.stl.export_stl_ascii(m))
    sb = mesh_shape(str(b), [1, 1, 1], np.eye(4), where="t")
    sa = mesh_shape(str(a), [1, 1, 1], np.eye(4), where="t")
    assert np.allclose(sa.size, sb.size, atol=1e-6) and abs(sa.radius - sb.radius) < 1e-6


def _urdf(mesh_filename, extra=""):
    return textwrap.dedent(f"""\
        <robot name="m">
          <link name="base"><collision><geometry><box size="0.2 0.2 0.1"/></geometry></collision></link>
          <link name="l1"><collision><geometry><mesh filename="{mesh_filename}" scale="0.001 0.001 0.001"/></geometry></collision>{extra}</link>
          <joint name="j1" type="revolute"><parent link="base"/><child link="l1"/>
            <origin xyz="0 0 0.1"/><axis xyz="0 0 1"/><limit lower="-1" upper="1" effort="1" velocity="1"/></joint>
        </robot>""")


def _mesh_mm(path):
    trimesh.creation.box(extents=[100, 50, 300]).export(path)  # millimetres, scaled by the URDF


def test_urdf_relative_and_package_paths(tmp_path):
    pkg = tmp_path / "pkg" / "meshes"
    pkg.mkdir(parents=True)
    _mesh_mm(pkg / "l1.stl")
    (tmp_path / "rel.urdf").write_text(_urdf("pkg/meshes/l1.stl"))
    m = read_arm_model(tmp_path / "rel.urdf")
    s = m.joints[0].shapes[0]
    assert s.kind == "mesh" and np.allclose(np.sort(s.size), [0.05, 0.1, 0.3], atol=1e-6)
    assert m.base_shapes[0].kind == "box"
    (tmp_path / "pk.urdf").write_text(_urdf("package://demo/meshes/l1.stl"))
    m2 = read_arm_model(tmp_path / "pk.urdf", package_paths={"demo": str(tmp_path / "pkg")})
    assert np.allclose(m2.joints[0].shapes[0].size, s.size)
    with pytest.raises(ArmFileError, match=r"no folder for package 'demo'.*--package-path demo=DIR"):
        read_arm_model(tmp_path / "pk.urdf", package_paths={})


@pytest.mark.parametrize("name, msg", [
    ("package://demo/../../secret.stl", "escapes the folder of package 'demo'"),
    ("package://demo//etc/passwd.stl", "escapes the folder of package 'demo'"),
    ("missing.stl", "does not exist"),
    ("broken.stl", "broken binary STL"),
    ("empty.stl", "holds no triangles"),
    ("part.obj", "only STL meshes"),
    ("http://example.org/a.stl", "only relative paths"),
])
def test_bad_meshes_one_line(tmp_path, name, msg):
    (tmp_path / "pkg").mkdir()
    (tmp_path / "secret.stl").write_bytes(b"")
    (tmp_path / "broken.stl").write_bytes(b"\0" * 80 + struct.pack("<I", 1000) + b"\0" * 100)
    (tmp_path / "empty.stl").write_text("solid empty\nendsolid empty\n")
    (tmp_path / "part.obj").write_text("v 0 0 0\n")
    (tmp_path / "a.urdf").write_text(_urdf(name))
    with pytest.raises(ArmFileError) as e:
        read_arm_model(tmp_path / "a.urdf", package_paths={"demo": str(tmp_path / "pkg")})
    text = str(e.value)
    assert msg in text and "\n" not in text and "a.urdf" in text and "'l1'" in text


def test_symlink_out_of_the_package_is_refused(tmp_path):
    pkg = tmp_path / "pkg"
    pkg.mkdir()
    _mesh_mm(tmp_path / "outside.stl")
    os.symlink(tmp_path / "outside.stl", pkg / "link.stl")
    (tmp_path / "a.urdf").write_text(_urdf("package://demo/link.stl"))
    with pytest.raises(ArmFileError, match="escapes the folder of package 'demo'"):
        read_arm_model(tmp_path / "a.urdf", package_paths={"demo": str(pkg)})


def test_too_many_triangles_refused_from_the_header(tmp_path):
    # a binary STL whose header claims more triangles than the limit: refused before reading
    n = MAX_TRIANGLES + 1
    f = tmp_path / "huge.stl"
    with open(f, "wb") as fh:
        fh.write(b"\0" * 80 + struct.pack("<I", n))
        fh.truncate(84 + 50 * n)  # sparse file of the right size
    (tmp_path / "a.urdf").write_text(_urdf("huge.stl"))
    with pytest.raises(ArmFileError, match=rf"has {n} triangles; at most {MAX_TRIANGLES}"):
        read_arm_model(tmp_path / "a.urdf")


@pytest.mark.slow
def test_a_million_triangle_mesh_is_enclosed(tmp_path):
    # bounded: one million triangles read and enclosed (the hull of every vertex); the enclosure
    # still contains every vertex
    m = trimesh.creation.icosphere(subdivisions=8, radius=0.1)  # 1 310 720 faces
    f = tmp_path / "big.stl"
    m.export(f)
    assert len(m.faces) > 1_000_000
    shp = mesh_shape(str(f), [1, 1, 1], np.eye(4), where="t")
    v = m.vertices[RNG.choice(len(m.vertices), 5000, replace=False)]
    assert _inside_margin(shp, v).max() <= 1e-9
    assert shp.radius == pytest.approx(0.1, rel=1e-3)


@pytest.mark.parametrize("shape, msg", [
    ('type = "sphere"\ncenter = [0, 0, 0]\nradius = 0', "radius must be > 0"),
    ('type = "capsule"\na = [0, 0, 0]\nb = [0, 0, 1]\nradius = -0.1', "radius must be > 0"),
    ('type = "capsule"\na = [0, 0, nan]\nb = [0, 0, 1]\nradius = 0.1', "finite"),
    ('type = "box"\ncenter = [0, 0, 0]\nsize = [0.1, 0, 0.1]', "every size must be > 0"),
    ('type = "cylinder"\na = [0, 0, 0]\nb = [0, 0, 0]\nradius = 0.1', "same point"),
    ('type = "cone"', "expected 'type' = one of"),
    ('type = "sphere"\nradius = 0.1', "missing key 'center'"),
    ('type = "mesh"\nfile = "nope.stl"', "does not exist"),
])
def test_degenerate_shapes_in_arm_files(tmp_path, shape, msg):
    text = f'[arm]\nname = "x"\n[[joint]]\nname = "a"\nxyz = [0, 0, 0]\naxis = [0, 0, 1]\n[[joint.shape]]\n{shape}\n'
    f = tmp_path / "x.toml"
    f.write_text(text)
    with pytest.raises(ArmFileError) as e:
        read_arm_model(f)
    assert msg in str(e.value) and "\n" not in str(e.value) and "x.toml" in str(e.value)


def test_short_radius_refused_when_not_positive(tmp_path):
    f = tmp_path / "x.toml"
    f.write_text('[arm]\nname = "x"\n[[joint]]\nname = "a"\nxyz = [0, 0, 0]\naxis = [0, 0, 1]\nradius = 0\n')
    with pytest.raises(ArmFileError, match=r"x.toml:7: joint 1 \('a'\) 'radius': radius must be > 0"):
        read_arm_model(f)
