"""Property-based checks (hypothesis): random valid arms parse and round-trip losslessly; random
garbage (TOML-able dicts, mutated arm files, bytes, XML) never raises anything but a one-line
ArmFileError."""
from __future__ import annotations

import copy
import dataclasses
import datetime
import math
import re
import tomllib

import numpy as np
from hypothesis import HealthCheck, given, settings
import pytest
from hypothesis import strategies as st

from workbench.arm import ArmFileError, dumps_arm, parse_arm_dict, parse_arm_text, same_arm
from workbench.arm.transforms import rpy_to_matrix
from workbench.arm.urdf import parse_urdf_text
from workbench.kinematics import Arm

SETTINGS = settings(max_examples=100, deadline=None, suppress_health_check=[HealthCheck.too_slow])
FEWER = settings(max_examples=50, deadline=None, suppress_health_check=[HealthCheck.too_slow])

length = st.floats(-2.0, 2.0, allow_nan=False, allow_infinity=False)
angle = st.floats(-180.0, 180.0, allow_nan=False, allow_infinity=False)
positive = st.floats(0.01, 5000.0, allow_nan=False, allow_infinity=False)
vec3 = st.lists(length, min_size=3, max_size=3)
angles3 = st.lists(angle, min_size=3, max_size=3)


@st.composite
def unit_vector(draw):
    v = np.array(draw(st.lists(st.floats(-1, 1, allow_nan=False), min_size=3, max_size=3)))
    if np.linalg.norm(v) < 1e-3:
        v = np.array([0.0, 0.0, 1.0])
    return [float(x) for x in v / np.linalg.norm(v)]


@st.composite
def placement(draw, allow_rot=True):
    d = {}
    if draw(st.booleans()):
        d["xyz"] = draw(vec3)
    form = draw(st.sampled_from(["none", "rpy", "rot"] if allow_rot else ["none", "rpy"]))
    if form == "rpy":
        d["rpy"] = draw(angles3)
    elif form == "rot":
        R = rpy_to_matrix(np.radians(draw(angles3)))
        d["rot"] = [[float(x) for x in r] for r in R]
    return d


@st.composite
def valid_arm(draw):
    geometry = draw(st.sampled_from(["dh", "mdh", "origins"]))
    unit = draw(st.sampled_from(["m", "mm"]))
    n = draw(st.integers(1, 8))
    joints = []
    home = []
    all_home = draw(st.booleans())
    for k in range(n):
        kind = draw(st.sampled_from(["revolute", "prismatic"]))
        j = {"name": f"j{k + 1}" + draw(st.sampled_from(["", "_a", "-B", " wrist"]))}
        if draw(st.booleans()) or kind == "prismatic":
            j["type"] = kind
        if geometry in ("dh", "mdh"):
            j.update(a=draw(length), alpha=draw(angle), d=draw(length), theta=draw(angle))
        else:
            j.update(draw(placement()))
            j["axis"] = draw(unit_vector())
        h = 0.0
        if draw(st.booleans()):
            lo = draw(st.floats(-360, 359, allow_nan=False))
            hi = draw(st.floats(lo + 0.5, 360, allow_nan=False))
            j["limits"] = [lo, hi]
            h = (lo + hi) / 2
        home.append(h)
        for key, strat in (("max_speed", positive), ("max_effort", positive),
                           ("mass", st.floats(0, 50, allow_nan=False)), ("com", vec3)):
            if draw(st.booleans()):
                j[key] = draw(strat)
        joints.append(j)
    arm = {"name": draw(st.text(min_size=1, max_size=20).filter(lambda s: s.strip() and "\x00" not in s)),
           "geometry": geometry, "length_unit": unit}
    if draw(st.booleans()):
        arm["description"] = draw(st.text(max_size=30).filter(lambda s: "\x00" not in s))
    if all_home:
        arm["home"] = home
    d = {"arm": arm, "joint": joints}
    for table in ("flange", "mount"):
        if draw(st.booleans()):
            d[table] = draw(placement())
    if draw(st.booleans()):
        t = draw(placement())
        if draw(st.booleans()):
            t["mass"] = draw(st.floats(0, 20, allow_nan=False))
            t["com"] = draw(vec3)
        d["tool"] = t
    return d


@FEWER
@given(valid_arm())
def test_random_valid_arms_round_trip(d):
    a = parse_arm_dict(copy.deepcopy(d), "random.toml")
    text = dumps_arm(a)
    assert tomllib.loads(text) == d                  # same dict
    b = parse_arm_text(text, "again.toml")
    assert same_arm(a, b, atol=0.0)                  # same model
    assert dumps_arm(b) == text
    # written from the model instead (origins, metres): same kinematics, same data
    c = parse_arm_text(dumps_arm(dataclasses.replace(a, source=None)), "from_model.toml")
    assert same_arm(a, c, atol=1e-9)
    q = Arm(a).random_q(3, rng=0)
    np.testing.assert_allclose(Arm(a).jacobian(q), Arm(c).jacobian(q), atol=1e-9)


# ---- garbage ---------------------------------------------------------------------------------------

leaf = (st.booleans() | st.integers() | st.integers(-10**30, 10**30) | st.floats() | st.text(max_size=10)
        | st.dates() | st.times() | st.datetimes(max_value=datetime.datetime(3000, 1, 1)))
toml_value = st.recursive(leaf, lambda ch: st.lists(ch, max_size=4) | st.dictionaries(st.text(max_size=6), ch, max_size=4),
                          max_leaves=12)
top_keys = st.sampled_from(["arm", "joint", "tool", "mount", "flange"]) | st.text(max_size=6)


def _only_arm_errors(fn, *args, **kw):
    try:
        fn(*args, **kw)
    except ArmFileError as exc:
        msg = str(exc)
        assert msg and "\n" not in msg, msg
        return False
    return True


@SETTINGS
@given(st.dictionaries(top_keys, toml_value, max_size=5))
def test_random_dicts_only_raise_arm_file_errors(d):
    _only_arm_errors(parse_arm_dict, d, "garbage.toml")


@FEWER
@given(st.dictionaries(st.sampled_from(["name", "geometry", "length_unit", "home", "description"]), toml_value),
       st.lists(st.dictionaries(st.sampled_from(["name", "type", "a", "alpha", "d", "theta", "xyz", "rpy", "rot",
                                                  "axis", "limits", "max_speed", "max_effort", "mass", "com"]),
                                toml_value), max_size=4))
def test_random_tables_with_known_keys_only_raise_arm_file_errors(arm, joints):
    _only_arm_errors(parse_arm_dict, {"arm": arm, "joint": joints}, "garbage.toml")


def _containers(obj, out):
    if isinstance(obj, dict):
        for k, v in obj.items():
            out.append((obj, k))
            _containers(v, out)
    elif isinstance(obj, list):
        for k, v in enumerate(obj):
            out.append((obj, k))
            _containers(v, out)
    return out


@SETTINGS
@given(valid_arm(), st.data())
def test_one_mutated_value_gives_an_arm_file_error_or_a_valid_arm(d, data):
    d = copy.deepcopy(d)
    places = _containers(d, [])
    parent, key = places[data.draw(st.integers(0, len(places) - 1))]
    if data.draw(st.booleans()) and isinstance(parent, dict):
        del parent[key]
    else:
        parent[key] = data.draw(toml_value | st.sampled_from([math.nan, math.inf, -math.inf, 0, 0.0, [], {}, ""]))
    if _only_arm_errors(parse_arm_dict, d, "mutated.toml"):
        a = parse_arm_dict(d, "mutated.toml")
        assert same_arm(a, parse_arm_text(dumps_arm(a), "again.toml"), atol=0.0)


@SETTINGS
@given(st.binary(max_size=400) | st.text(max_size=400).map(str.encode))
def test_random_bytes_only_raise_arm_file_errors(raw):
    _only_arm_errors(parse_arm_text, raw, "bytes.toml")
    _only_arm_errors(parse_urdf_text, raw, "bytes.urdf")


@st.composite
def random_urdf(draw):
    nlinks = draw(st.integers(1, 6))
    links = [f"l{k}" for k in range(nlinks)]
    joints = []
    for k in range(draw(st.integers(0, 7))):
        parent = draw(st.sampled_from(links + ["ghost"]))
        child = draw(st.sampled_from(links + ["ghost"]))
        jtype = draw(st.sampled_from(["revolute", "continuous", "prismatic", "fixed", "floating", "planar", "weird"]))
        num = st.sampled_from(["0", "1", "-1", "0.5", "nan", "inf", "x", "1e400", ""])
        lim = draw(st.sampled_from(["", f'<limit lower="{draw(num)}" upper="{draw(num)}" effort="{draw(num)}" velocity="1"/>']))
        axis = draw(st.sampled_from(["", '<axis xyz="0 0 1"/>', '<axis xyz="0 0 0"/>', '<axis xyz="1 2"/>']))
        mimic = draw(st.sampled_from(["", '<mimic joint="j0"/>']))
        joints.append(f'<joint name="j{k}" type="{jtype}"><parent link="{parent}"/><child link="{child}"/>'
                      f'<origin xyz="0 0 {draw(num)}"/>{axis}{lim}{mimic}</joint>')
    inert = draw(st.sampled_from(["", '<inertial><mass value="1"/></inertial>', '<inertial><mass value="-1"/></inertial>']))
    body = "".join(f'<link name="{n}">{inert}</link>' for n in links) + "".join(joints)
    return f'<robot name="r">{body}</robot>'


@SETTINGS
@given(random_urdf(), st.sampled_from([None, "l0", "l1", "nope"]), st.sampled_from([None, "l2", "l5"]))
def test_random_urdf_trees_only_raise_arm_file_errors(text, base, tip):
    if _only_arm_errors(parse_urdf_text, text, "random.urdf", base_link=base, tip_link=tip):
        m = parse_urdf_text(text, "random.urdf", base_link=base, tip_link=tip)
        assert 1 <= m.n and np.all(np.isfinite(m.origins))
        assert same_arm(m, parse_arm_text(dumps_arm(m), "urdf.toml"), atol=1e-9)


@settings(max_examples=25, deadline=None, suppress_health_check=[HealthCheck.too_slow])
@given(valid_arm(), st.integers(0, 2**31 - 1))
def test_info_and_jacobian_commands_handle_random_valid_arms(d, seed):
    from workbench.cli.info import format_info, summarise

    arm = Arm(parse_arm_dict(copy.deepcopy(d), "random.toml"))
    info = summarise(arm, samples=50, seed=seed)
    assert info["dof"] == arm.n and len(info["joints"]) == arm.n
    assert info["reach"]["from_axis_m"] <= info["reach"]["from_origin_m"] + 1e-9
    assert arm.model.name in format_info(info)
    # the jacobian command's text for a random pose (no exception, one column per joint)
    import argparse
    import contextlib
    import io

    from workbench.cli import jacobian

    q = arm.random_q(1, rng=seed)[0]
    tokens = [",".join(repr(float(v * (180 / math.pi if j.revolute else 1000))) for v, j in zip(q, arm.model.joints))]
    np.testing.assert_allclose(jacobian.parse_q(tokens, arm), q, rtol=1e-12, atol=1e-12)
    buf = io.StringIO()
    args = argparse.Namespace(arm=None, base=None, tip=None, q=tokens, frame="tcp", rows="translation",
                              length=None, world=True, json=False)
    jacobian.load = lambda a, _arm=arm: _arm  # the arm is built in memory here
    try:
        with contextlib.redirect_stdout(buf):
            assert jacobian.run(args) == 0
    finally:
        from workbench.cli import info as _info

        jacobian.load = _info.load
    # "singular values (m):" for translation rows of revolute joints (the unit: workbench/quantities.py)
    assert re.search(r"^  singular values( \([^)]*\))?: ", buf.getvalue(), re.M)


def test_a_key_with_a_newline_is_named_on_one_line():
    # found by test_random_dicts_only_raise_arm_file_errors: the key went raw into the error line
    for d in ({"arm": {"a\nb": 1}}, {"arm": {"name": "x"}, "joint": [{"a\nb": 1}]}):
        with pytest.raises(ArmFileError) as info:
            parse_arm_dict(d, "garbage.toml")
        assert "\n" not in str(info.value) and "'a\\nb'" in str(info.value)
