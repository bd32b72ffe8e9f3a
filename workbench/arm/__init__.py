"""Arm model, arm files (our TOML schema), URDF import and validation. Pure data; no kinematics."""
from __future__ import annotations

import os

from .files import (ArmFileError, arm_to_dict, dumps_arm, parse_arm_dict, parse_arm_text, read_arm_file,
                    same_arm, write_arm_file)
from .model import ArmError, ArmModel, Joint

__all__ = ["ArmModel", "Joint", "ArmError", "ArmFileError", "read_arm_model", "read_arm_file",
           "write_arm_file", "parse_arm_dict", "parse_arm_text", "arm_to_dict", "dumps_arm", "same_arm",
           "read_urdf"]

ARM_FILE_TYPES = (".toml", ".urdf", ".xml")


def read_urdf(path, base_link: str | None = None, tip_link: str | None = None,
              package_paths: dict | None = None) -> ArmModel:
    """Import the serial chain of a URDF file; see :func:`workbench.arm.urdf.read_urdf`."""
    from .urdf import read_urdf as _read

    return _read(path, base_link=base_link, tip_link=tip_link, package_paths=package_paths)


def read_arm_model(path, base_link: str | None = None, tip_link: str | None = None,
                   package_paths: dict | None = None) -> ArmModel:
    """Read an arm file (``.toml``) or a URDF (``.urdf``/``.xml``) -> ArmModel (SI units).

    Parameters
    ----------
    path : str or os.PathLike
        The file.
    base_link, tip_link : str, optional
        URDF only: the links that start and end the imported chain (default: the root link and the
        single leaf link).
    package_paths : dict, optional
        URDF only: NAME -> folder for ``package://NAME/...`` mesh paths (default: those set with
        :func:`workbench.arm.urdf.set_package_paths`, e.g. by ``--package-path``).

    Raises
    ------
    ArmFileError
        For any bad file, with one line naming the file, the place and what is expected.
    """
    if not isinstance(path, (str, os.PathLike)):
        raise ArmFileError(f"path: expected an arm file path (.toml or .urdf), got {type(path).__name__} {path!r}")
    p = os.fspath(path)
    if isinstance(p, bytes):
        p = os.fsdecode(p)
    if os.path.isdir(p):
        raise ArmFileError(f"{p}: is a directory, expected an arm file (.toml or .urdf)")
    ext = os.path.splitext(p)[1].lower()
    if ext in (".urdf", ".xml"):
        return read_urdf(p, base_link=base_link, tip_link=tip_link, package_paths=package_paths)
    if ext != ".toml":
        raise ArmFileError(f"{p}: unknown arm file type {ext or '(none)'!r}; expected .toml (arm file) or .urdf")
    if base_link is not None or tip_link is not None:
        raise ArmFileError(f"{p}: base and tip links can only be chosen for a URDF file, not for a .toml arm file")
    return read_arm_file(p)
