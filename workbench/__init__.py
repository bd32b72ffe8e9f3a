"""Manipulability Workbench: map Jacobian-based measures of robot arms over joint space, slices of
a cell, candidate mounting spots and paths.

Public API (see README)::

    from workbench import load_arm, measures
    arm = load_arm("arms/demo_s6.toml")
    J = arm.jacobian(q, frame="tcp")          # (..., 6, n)
    m = measures(J, rows="translation")
"""
from __future__ import annotations

__version__ = "0.1.0"

__all__ = ["load_arm", "measures", "pose_measures", "Arm", "__version__"]


def load_arm(path, base_link=None, tip_link=None):
    """Load an arm file (.toml) or URDF (.urdf) -> :class:`workbench.kinematics.Arm`."""
    from .kinematics.arm import load_arm as _load

    return _load(path, base_link=base_link, tip_link=tip_link)




def __getattr__(name):  # lazy, so that importing workbench (or workbench.arm) stays light
    if name == "pose_measures":
        from .measures import pose_measures

        return pose_measures
    if name == "Arm":
        from .kinematics import Arm

        return Arm
    raise AttributeError(f"module 'workbench' has no attribute {name!r}")
