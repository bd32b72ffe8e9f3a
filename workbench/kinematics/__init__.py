"""Batched kinematics: forward kinematics, Jacobians of any frame, compiled kernels, IK."""
from . import threads  # noqa: F401  (first: the kernels' threading layer and wait policy, see threads.py)
from .arm import Arm, load_arm
from .rows import parse_rows, row_scale

__all__ = ["Arm", "load_arm", "parse_rows", "row_scale"]
