"""URDF import: the serial chain between a base link and a tip link -> :class:`ArmModel`.

URDF is the open XML robot description format of the trade. What is read:

* ``<joint type="revolute|continuous|prismatic|fixed">`` with ``<parent>``, ``<child>``,
  ``<origin xyz rpy>`` (defaults zero), ``<axis xyz>`` (default 1 0 0, normalised) and
  ``<limit lower upper effort velocity>``. ``continuous`` joints become unlimited revolute joints;
  an ``effort`` or ``velocity`` of 0 counts as "not given".
* fixed joints on the chain are folded into the next moving joint's origin, or into the flange
  transform (``ArmModel.end``) after the last moving joint;
* ``<inertial>`` ``<mass value>`` and ``<origin xyz>`` of every link rigidly attached to a moving
  link (through fixed joints, also off the chain) are lumped into that joint's mass and centre of
  mass, expressed in the joint's frame (the inertial origin's rotation does not move the centre of
  mass; the inertia tensor is not used).

* ``<collision>`` elements of every link rigidly attached to a moving link (or to the base):
  ``<origin>`` and ``<geometry>`` with ``<box size>``, ``<cylinder radius length>``,
  ``<sphere radius>`` or ``<mesh filename scale>`` (STL, binary or ASCII; a path relative to the
  URDF's folder, or ``package://NAME/...`` resolved in the folder given for NAME with
  ``package_paths`` / ``--package-path NAME=DIR``; paths that leave that folder are refused).
  Meshes become conservative enclosures (:mod:`workbench.arm.meshes`). Shapes go to the joint of
  the link they belong to (in its frame), or to the base.

Refused with one clear line (:class:`~workbench.arm.files.ArmFileError`): malformed XML, DTDs and
entity declarations (entity expansion, external entities: parsed with defusedxml), xacro macros,
two roots, cycles, a link with two parents (closed loops), joints naming links that do not exist,
and on the chosen chain: mimic joints and floating or planar joints.
"""
from __future__ import annotations

import math
import os
from dataclasses import replace

import numpy as np

from ..limits import MAX_MAGNITUDE
from .files import MAX_FILE_BYTES, MAX_JOINTS, ArmFileError, arm_joint_name
from .model import PRISMATIC, REVOLUTE, ArmModel, Joint
from .transforms import make_transform

__all__ = ["read_urdf", "parse_urdf_text", "set_package_paths", "package_paths", "resolve_mesh_path"]

_PACKAGE_PATHS: dict[str, str] = {}


def set_package_paths(paths: dict | None) -> None:
    """Default folders for ``package://NAME/...`` mesh paths (the CLI's ``--package-path``)."""
    _PACKAGE_PATHS.clear()
    _PACKAGE_PATHS.update({str(k): os.fspath(v) for k, v in (paths or {}).items()})


def package_paths() -> dict:
    return dict(_PACKAGE_PATHS)


def resolve_mesh_path(filename: str, urdf_dir: str | None, packages: dict, where: str) -> str:
    """The file a URDF mesh ``filename`` names: relative to the URDF's folder, absolute, ``file://``
    or ``package://NAME/REL`` inside the folder given for NAME (never outside it)."""
    if filename.startswith("package://"):
        rest = filename[len("package://"):]
        name, _, rel = rest.partition("/")
        if not name or not rel:
            raise ArmFileError(f"{where}: mesh filename {filename!r}: expected package://NAME/PATH")
        if name not in packages:
            known = ", ".join(sorted(packages)) or "none given"
            raise ArmFileError(f"{where}: mesh filename {filename!r}: no folder for package {name!r} ({known}); "
                               f"give --package-path {name}=DIR")
        root = os.path.realpath(packages[name])
        if os.path.isabs(rel):
            raise ArmFileError(f"{where}: mesh filename {filename!r} escapes the folder of package {name!r}")
        full = os.path.realpath(os.path.join(root, rel))
        if os.path.commonpath([root, full]) != root:
            raise ArmFileError(f"{where}: mesh filename {filename!r} escapes the folder of package {name!r} "
                               f"({root})")
        return full
    if filename.startswith("file://"):
        return filename[len("file://"):]
    if "://" in filename:
        raise ArmFileError(f"{where}: mesh filename {filename!r}: only relative paths, file:// and package:// "
                           f"are read")
    if os.path.isabs(filename) or urdf_dir is None:
        return filename
    return os.path.join(urdf_dir, filename)

_MOVING = {"revolute", "continuous", "prismatic"}
_KNOWN = _MOVING | {"fixed", "floating", "planar"}


def _list(names, k=8) -> str:
    names = list(names)
    s = ", ".join(names[:k])
    return s + (f", ... ({len(names)} in all)" if len(names) > k else "")


class _Joint:
    __slots__ = ("name", "type", "parent", "child", "origin", "axis", "limit", "mimic")


def read_urdf(path, base_link: str | None = None, tip_link: str | None = None,
              package_paths: dict | None = None) -> ArmModel:
    """Import the serial chain of a URDF file.

    Parameters
    ----------
    path : str or os.PathLike
        The ``.urdf`` (XML) file.
    base_link : str, optional
        Link where the chain starts (the arm's base frame). Default: the root link.
    tip_link : str, optional
        Link where the chain ends (its frame is the flange). Default: the single leaf link below
        ``base_link``; when there are several, the error lists them.

    Returns
    -------
    ArmModel
        SI units; ``source`` is None (write it out with :func:`workbench.arm.files.write_arm_file`
        to get an arm file).

    Raises
    ------
    ArmFileError
        One line naming the file, the element and what is expected.
    """
    path = os.fspath(path)
    if os.path.isdir(path):
        raise ArmFileError(f"{path}: is a directory, expected a URDF file")
    try:
        with open(path, "rb") as fh:
            raw = fh.read(MAX_FILE_BYTES * 4 + 1)
    except FileNotFoundError:
        raise ArmFileError(f"{path}: no such file") from None
    except OSError as exc:
        raise ArmFileError(f"{path}: cannot be read ({exc.strerror or exc})") from None
    if len(raw) > MAX_FILE_BYTES * 4:
        raise ArmFileError(f"{path}: larger than {MAX_FILE_BYTES * 4 // (1024 * 1024)} MB; refusing to parse it "
                           f"as a URDF")
    return parse_urdf_text(raw, source_name=path, base_link=base_link, tip_link=tip_link,
                           package_paths=package_paths)


def parse_urdf_text(raw, source_name: str = "<urdf>", base_link: str | None = None,
                    tip_link: str | None = None, package_paths: dict | None = None) -> ArmModel:
    """Import the serial chain of URDF text (str or bytes); see :func:`read_urdf`."""
    import defusedxml
    from defusedxml import ElementTree as DET

    src = source_name
    if isinstance(raw, str):
        raw = raw.encode("utf-8")
    try:
        root = DET.fromstring(raw, forbid_dtd=True, forbid_entities=True, forbid_external=True)
    except defusedxml.DTDForbidden:
        raise ArmFileError(f"{src}: contains a DTD (<!DOCTYPE ...>); refused for safety (entity expansion, "
                           f"external entities); a URDF needs none") from None
    except defusedxml.EntitiesForbidden:
        raise ArmFileError(f"{src}: declares XML entities; refused for safety (entity expansion); a URDF needs "
                           f"none") from None
    except defusedxml.ExternalReferenceForbidden:
        raise ArmFileError(f"{src}: refers to an external entity or file; refused for safety") from None
    except defusedxml.DefusedXmlException as exc:
        raise ArmFileError(f"{src}: unsafe XML refused ({type(exc).__name__})") from None
    except DET.ParseError as exc:
        raise ArmFileError(f"{src}: malformed XML: {str(exc).splitlines()[0]}") from None
    except LookupError as exc:  # <?xml ... encoding="..."?> that Python does not know
        raise ArmFileError(f"{src}: {str(exc).splitlines()[0] if str(exc) else 'unknown encoding'} in the XML "
                           f"declaration; expected UTF-8 (or another encoding Python knows)") from None
    except (ValueError, RecursionError) as exc:
        raise ArmFileError(f"{src}: malformed XML: {str(exc).splitlines()[0] if str(exc) else 'nested too deeply'}"
                           ) from None

    if root.tag != "robot":
        if "xacro" in str(root.tag):
            raise ArmFileError(f"{src}: this is a xacro file; expand it to plain URDF first")
        raise ArmFileError(f"{src}: root element is <{root.tag}>; expected <robot> (a URDF file)")
    for el in root.iter():
        if isinstance(el.tag, str) and el.tag.startswith("{") and "xacro" in el.tag:
            raise ArmFileError(f"{src}: contains xacro macros (<{el.tag.split('}')[-1]}>); expand them to plain "
                               f"URDF first")
    robot_name = (root.get("name") or "").strip() or os.path.splitext(os.path.basename(src))[0] or "URDF arm"

    # ---- links ---------------------------------------------------------------------------------
    links: dict[str, tuple[float | None, np.ndarray | None]] = {}  # name -> (mass, com in link frame)
    collisions: dict[str, list] = {}
    for k, el in enumerate(root.findall("link")):
        lname = el.get("name")
        if not lname:
            raise ArmFileError(f"{src}: <link> number {k + 1} has no name attribute")
        if lname in links:
            raise ArmFileError(f"{src}: <link name={lname!r}> is defined twice")
        links[lname] = _inertial(el, src, lname)
        collisions[lname] = el.findall("collision")
    if not links:
        raise ArmFileError(f"{src}: no <link> elements; expected a URDF robot")

    # ---- joints --------------------------------------------------------------------------------
    joints: dict[str, _Joint] = {}
    parent_of: dict[str, _Joint] = {}   # child link -> joint
    children: dict[str, list[_Joint]] = {name: [] for name in links}
    for k, el in enumerate(root.findall("joint")):
        j = _Joint()
        j.name = el.get("name")
        if not j.name:
            raise ArmFileError(f"{src}: <joint> number {k + 1} has no name attribute")
        where = f"{src}: joint {j.name!r}"
        if j.name in joints:
            raise ArmFileError(f"{where}: defined twice")
        j.type = el.get("type")
        if j.type not in _KNOWN:
            raise ArmFileError(f"{where}: unknown type {j.type!r}; expected revolute, continuous, prismatic or "
                               f"fixed")
        for tag in ("parent", "child"):
            sub = el.find(tag)
            lk = None if sub is None else sub.get("link")
            if not lk:
                raise ArmFileError(f"{where}: missing <{tag} link=\"...\"/>")
            if lk not in links:
                raise ArmFileError(f"{where}: <{tag}> names link {lk!r}, which is not defined")
            setattr(j, tag, lk)
        if j.parent == j.child:
            raise ArmFileError(f"{where}: parent and child are the same link {j.parent!r} (a cycle)")
        if j.child in parent_of:
            other = parent_of[j.child]
            raise ArmFileError(f"{where}: link {j.child!r} already has parent joint {other.name!r} (a closed "
                               f"loop); only tree-shaped URDFs are supported")
        o = el.find("origin")
        j.origin = np.eye(4) if o is None else make_transform(
            _triple(o.get("xyz"), where, "origin xyz"), _triple(o.get("rpy"), where, "origin rpy"))
        a = el.find("axis")
        axis = np.array([1.0, 0.0, 0.0]) if a is None or a.get("xyz") is None else \
            _triple(a.get("xyz"), where, "axis xyz")
        norm = float(np.linalg.norm(axis))
        if j.type in _MOVING and norm < 1e-9:
            raise ArmFileError(f"{where}: <axis xyz> has zero length; expected a direction")
        j.axis = axis / norm if norm >= 1e-9 else axis
        j.limit = el.find("limit")
        j.mimic = el.find("mimic")
        joints[j.name] = j
        parent_of[j.child] = j
        children[j.parent].append(j)

    # ---- tree checks: one root, no cycles ------------------------------------------------------
    roots = [n for n in links if n not in parent_of]
    rooted = set(roots)  # links known to lead up to a root
    for start in links:
        seen: list[str] = []
        n = start
        while n not in rooted:
            if n in seen:
                cyc = seen[seen.index(n):]
                raise ArmFileError(f"{src}: the joints form a cycle through links {_list(cyc)}; a URDF must be a "
                                   f"tree")
            seen.append(n)
            n = parent_of[n].parent
        rooted.update(seen)
    if len(roots) > 1:
        raise ArmFileError(f"{src}: {len(roots)} root links ({_list(roots)}); a URDF must have exactly one link "
                           f"without a parent joint")
    if not roots:  # pragma: no cover - a cycle is found above
        raise ArmFileError(f"{src}: no root link (every link has a parent joint)")
    root_link = roots[0]

    # ---- the chain -----------------------------------------------------------------------------
    base = root_link if base_link is None else base_link
    if base not in links:
        raise ArmFileError(f"{src}: base link {base!r} is not defined; links are {_list(links)}")
    if tip_link is None:
        leaves = [n for n in _subtree(base, children) if not children[n]]
        if len(leaves) != 1:
            raise ArmFileError(f"{src}: {len(leaves)} leaf links below {base!r} ({_list(leaves)}); choose the "
                               f"tip link (tip_link=..., or --tip LINK on the command line)")
        tip = leaves[0]
    else:
        tip = tip_link
        if tip not in links:
            raise ArmFileError(f"{src}: tip link {tip!r} is not defined; links are {_list(links)}")
    path_joints: list[_Joint] = []
    n = tip
    while n != base:
        if n not in parent_of:
            raise ArmFileError(f"{src}: tip link {tip!r} is not below base link {base!r}")
        path_joints.append(parent_of[n])
        n = parent_of[n].parent
    path_joints.reverse()

    moving = [j for j in path_joints if j.type in _MOVING]
    for j in path_joints:
        if j.type in ("floating", "planar"):
            raise ArmFileError(f"{src}: joint {j.name!r} is {j.type}; only revolute, continuous, prismatic and "
                               f"fixed joints are supported on the chain {base!r} -> {tip!r}")
        if j.mimic is not None:
            raise ArmFileError(f"{src}: joint {j.name!r} mimics joint {j.mimic.get('joint')!r}; mimic joints are "
                               f"not supported on the chain {base!r} -> {tip!r}")
    if not moving:
        raise ArmFileError(f"{src}: the chain {base!r} -> {tip!r} has no moving joints")
    if len(moving) > MAX_JOINTS:
        raise ArmFileError(f"{src}: the chain {base!r} -> {tip!r} has {len(moving)} moving joints; at most "
                           f"{MAX_JOINTS} are supported")

    # ---- build the model -----------------------------------------------------------------------
    packages = dict(_PACKAGE_PATHS if package_paths is None else package_paths)
    base_shapes = _shapes_of(base, children, collisions, src, packages)
    out: list[Joint] = []
    pending = np.eye(4)
    for j in path_joints:
        if j.type == "fixed":
            pending = pending @ j.origin
            continue
        where = f"{src}: joint {j.name!r}"
        origin = pending @ j.origin
        pending = np.eye(4)
        lower, upper, effort, velocity = _limits(j, where)
        mass, com = _lumped(j.child, children, links)
        out.append(Joint(j.name, PRISMATIC if j.type == "prismatic" else REVOLUTE,
                         np.ascontiguousarray(origin), j.axis.copy(), lower, upper, velocity, effort, mass, com,
                         shapes=tuple(_shapes_of(j.child, children, collisions, src, packages))))
    end = pending
    names = [j.name for j in out]
    if len(set(names)) != len(names):  # pragma: no cover - joint names are unique above
        raise ArmFileError(f"{src}: duplicate joint names on the chain")
    # names an arm file cannot hold ('arm:j1', '2', 'base') are renamed, so the arm written from
    # this model reads back; the description says which
    renamed, taken = [], set()
    for k, j in enumerate(out):
        new = arm_joint_name(j.name, taken | set(names[k + 1:]))
        taken.add(new)
        if new != j.name:
            renamed.append(f"{j.name!r} -> {new!r}")
            out[k] = replace(j, name=new)
    home = np.clip(np.zeros(len(out)), [j.lower for j in out], [j.upper for j in out])
    description = f"imported from URDF {os.path.basename(src)} ({base} -> {tip})"
    if renamed:
        description += f"; joints renamed for arm files: {', '.join(renamed)}"
    return ArmModel(name=robot_name, joints=tuple(out), end=np.ascontiguousarray(end), home=home,
                    description=description, source=None, path=src, base_shapes=tuple(base_shapes))


def _subtree(base, children):
    out, stack = [], [base]
    while stack:
        n = stack.pop()
        out.append(n)
        stack.extend(c.child for c in reversed(children[n]))
    return out


def _float(s, where, what) -> float:
    try:
        v = float(s)
    except (TypeError, ValueError):
        raise ArmFileError(f"{where}: {what}: expected a number, got {s!r}") from None
    if not math.isfinite(v):
        raise ArmFileError(f"{where}: {what}: expected a finite number, got {s!r}")
    if abs(v) > MAX_MAGNITUDE:  # the same bound as the arm-file reader's
        raise ArmFileError(f"{where}: {what}: expected a number of magnitude at most {MAX_MAGNITUDE:g}, got {s!r}")
    return v


def _triple(s, where, what) -> np.ndarray:
    if s is None:
        return np.zeros(3)
    parts = s.split()
    if len(parts) != 3:
        raise ArmFileError(f"{where}: {what}: expected three numbers, got {s!r}")
    return np.array([_float(p, where, what) for p in parts])


def _inertial(el, src, lname):
    """(mass kg or None, com (3,) in the link frame or None) of a <link>."""
    ine = el.find("inertial")
    if ine is None:
        return None, None
    where = f"{src}: link {lname!r}"
    m = ine.find("mass")
    if m is None or m.get("value") is None:
        raise ArmFileError(f"{where}: <inertial> without <mass value=\"...\"/>")
    mass = _float(m.get("value"), where, "inertial mass")
    if mass < 0:
        raise ArmFileError(f"{where}: inertial mass: expected a number >= 0, got {m.get('value')!r}")
    o = ine.find("origin")
    # only the position of the inertial frame matters for the centre of mass; its rotation only
    # turns the inertia tensor
    com = np.zeros(3) if o is None else _triple(o.get("xyz"), where, "inertial origin xyz")
    if o is not None:
        _triple(o.get("rpy"), where, "inertial origin rpy")  # validated, not used
    return mass, com


def _limits(j, where):
    lim = j.limit
    lower, upper = -math.inf, math.inf
    effort = velocity = None
    if lim is None:
        if j.type != "continuous":
            raise ArmFileError(f"{where}: {j.type} joint without <limit>; URDF requires lower, upper, effort and "
                               f"velocity")
        return lower, upper, effort, velocity
    if lim.get("effort") is not None:
        e = _float(lim.get("effort"), where, "limit effort")
        if e < 0:
            raise ArmFileError(f"{where}: limit effort: expected a number >= 0, got {lim.get('effort')!r}")
        effort = e if e > 0 else None
    if lim.get("velocity") is not None:
        v = _float(lim.get("velocity"), where, "limit velocity")
        if v < 0:
            raise ArmFileError(f"{where}: limit velocity: expected a number >= 0, got {lim.get('velocity')!r}")
        velocity = v if v > 0 else None
    if j.type != "continuous":
        lo = _float(lim.get("lower", "0"), where, "limit lower")
        hi = _float(lim.get("upper", "0"), where, "limit upper")
        if not lo < hi:
            raise ArmFileError(f"{where}: limit lower {lo:g} must be below upper {hi:g} (reversed or empty range)")
        lower, upper = lo, hi
    return lower, upper, effort, velocity


def _lumped(link, children, links):
    """Mass and centre of mass (in ``link``'s frame) of ``link`` and every link fixed to it."""
    total = 0.0
    moment = np.zeros(3)
    found = False
    stack = [(link, np.eye(4))]
    while stack:
        name, T = stack.pop()
        m, c = links[name]
        if m is not None:
            found = True
            total += m
            moment += m * (T[:3, :3] @ c + T[:3, 3])
        for j in children[name]:
            if j.type == "fixed":
                stack.append((j.child, T @ j.origin))
    if not found:
        return None, None
    com = moment / total if total > 0 else np.zeros(3)
    return total, com


def _shapes_of(link, children, collisions, src, packages) -> list:
    """Collision shapes (in ``link``'s frame) of ``link`` and every link fixed to it."""
    from .model import ArmError
    from .shapes import MAX_SHAPES, box, check_shape, cylinder, sphere

    urdf_dir = None if src.startswith("<") else os.path.dirname(os.path.abspath(src))
    out = []
    stack = [(link, np.eye(4))]
    while stack:
        name, T = stack.pop()
        for k, col in enumerate(collisions.get(name, ())):
            where = f"{src}: link {name!r} <collision> {k + 1}"
            o = col.find("origin")
            G = np.eye(4) if o is None else make_transform(_triple(o.get("xyz"), where, "origin xyz"),
                                                           _triple(o.get("rpy"), where, "origin rpy"))
            P = T @ G
            geo = col.find("geometry")
            kids = [] if geo is None else [e for e in geo if isinstance(e.tag, str)]
            if len(kids) != 1:
                raise ArmFileError(f"{where}: expected one of <box>, <cylinder>, <sphere>, <mesh> in <geometry>")
            g = kids[0]
            if g.tag == "box":
                sz = _triple(g.get("size"), where, "box size")
                shp = box(P, sz)
            elif g.tag == "cylinder":
                shp = cylinder(P, _float(g.get("radius"), where, "cylinder radius"),
                               _float(g.get("length"), where, "cylinder length"))
            elif g.tag == "sphere":
                shp = sphere(P[:3, 3], _float(g.get("radius"), where, "sphere radius"))
            elif g.tag == "mesh":
                fn = g.get("filename")
                if not fn:
                    raise ArmFileError(f"{where}: <mesh> without a filename attribute")
                scale = np.ones(3) if g.get("scale") is None else _triple(g.get("scale"), where, "mesh scale")
                if np.any(scale == 0):
                    raise ArmFileError(f"{where}: mesh scale {g.get('scale')!r} flattens the mesh")
                from .meshes import mesh_shape

                path = resolve_mesh_path(fn, urdf_dir, packages, where)
                try:
                    shp = mesh_shape(path, scale, P, where=where, file_name=fn)
                except ArmError as exc:
                    raise ArmFileError(str(exc)) from None
            else:
                raise ArmFileError(f"{where}: unknown geometry <{g.tag}>; expected box, cylinder, sphere or mesh")
            try:
                out.append(check_shape(shp, where))
            except ArmError as exc:
                raise ArmFileError(str(exc)) from None
            if len(out) > MAX_SHAPES:
                raise ArmFileError(f"{where}: more than {MAX_SHAPES} collision shapes on one link")
        for j in children.get(name, ()):
            if j.type == "fixed":
                stack.append((j.child, T @ j.origin))
    return out
