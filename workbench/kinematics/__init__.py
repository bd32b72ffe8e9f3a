"""Batched kinematics: forward kinematics, Jacobians of any frame, compiled kernels, IK."""
from .arm import Arm
from .rows import parse_rows, row_scale

__all__ = ["Arm", "parse_rows", "row_scale"]
