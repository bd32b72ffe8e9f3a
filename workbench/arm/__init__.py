"""Arm model, arm files (our TOML schema), URDF import and validation. Pure data; no kinematics."""
from __future__ import annotations

import os

from .files import ArmFileError, read_arm_file, write_arm_file
from .model import ArmError, ArmModel, Joint

__all__ = ["ArmModel", "Joint", "ArmError", "ArmFileError", "read_arm_model", "read_arm_file",
           "write_arm_file"]


def read_arm_model(path, base_link: str | None = None, tip_link: str | None = None) -> ArmModel:
    """Read an arm file (``.toml``) or a URDF (``.urdf``/``.xml``) -> ArmModel."""
    p = os.fspath(path)
    ext = os.path.splitext(p)[1].lower()
    if ext in (".urdf", ".xml"):
        from .urdf import read_urdf

        return read_urdf(p, base_link=base_link, tip_link=tip_link)
    if ext != ".toml":
        raise ArmFileError(f"{p}: unknown arm file type {ext or '(none)'!r}; expected .toml (arm file) or .urdf")
    return read_arm_file(p)
