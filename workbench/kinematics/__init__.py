"""Batched kinematics: forward kinematics, Jacobians of any frame, compiled kernels, IK."""
from .arm import Arm, load_arm
from .rows import parse_rows, row_scale

__all__ = ["Arm", "load_arm", "parse_rows", "row_scale"]
