"""Study kinds: pure specs that split into chunks and compute one chunk at a time.

See :mod:`workbench.studies.base` for the framework (Plan, Axis, Field, Chunk, StudyKind, the
registry of kinds) and :mod:`workbench.studies.spec` for study files.
"""
from .base import (KINDS, Axis, Chunk, Estimate, Field, Plan, StudyError, StudyKind, Table,
                   calibrate, get_kind, kind_names, register_kind)
from .spec import (StudySpec, dumps_study, load_context, parse_study_dict, read_study_file,
                   write_study_file)

__all__ = ["KINDS", "Axis", "Chunk", "Estimate", "Field", "Plan", "StudyError", "StudyKind", "Table",
           "calibrate", "get_kind", "kind_names", "register_kind", "StudySpec", "dumps_study",
           "load_context", "parse_study_dict", "read_study_file", "write_study_file"]
