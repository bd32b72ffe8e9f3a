"""Shared bounds on input: sizes, numbers, nesting and derived allocations.

Every reader and every study checks its input against these limits *before* any work or any large
allocation starts, and refuses with one line naming the file, the key, the value and the limit.
The numbers are generous for real cells and arms (a cell of a kilometre, a million path samples)
and far below what would exhaust a workstation.

This module imports nothing of the package except :mod:`workbench.errors`, so every layer may use
it.
"""
from __future__ import annotations

import math

from .errors import WorkbenchError

__all__ = [
    "LimitError", "MAX_TEXT_BYTES", "MAX_LINE_CHARS", "MAX_KEY_DEPTH", "MAX_NESTING", "MAX_MAGNITUDE",
    "MAX_CELL_COORD", "MAX_CELLS", "MAX_PATH_SAMPLES", "MAX_AXIS_VALUES", "SCHEDULER_TIMEOUT_S",
    "check_toml_text", "check_count", "check_magnitude", "grid_count",
]

#: bytes of any text input (arm, URDF, cell or study file); these are a few kB in practice
MAX_TEXT_BYTES = 16 * 1024 * 1024
#: characters on one line of a TOML file (a long inline list of point names is a few hundred)
MAX_LINE_CHARS = 65536
#: parts of one TOML key (``a.b.c`` has 3) or table header; our schemas use at most 2. The
#: standard TOML reader needs memory growing with the square of this count (100 000 parts: 23 GB)
MAX_KEY_DEPTH = 16
#: arrays / inline tables inside each other (a rotation matrix is 2 deep)
MAX_NESTING = 32
#: any number in a file, in the file's units (larger values are typos, not arms or cells)
MAX_MAGNITUDE = 1e9
#: any position in a cell (work points, boxes, mount region, placement), in metres
MAX_CELL_COORD = 1000.0
#: grid cells of one study (results are written per cell; 1e8 cells of ~100 bytes = 10 GB)
MAX_CELLS = 100_000_000
#: samples along the paths of one path audit (tracked one after the other)
MAX_PATH_SAMPLES = 2_000_000
#: values along one grid axis of a study (steps, samples along u or v ...)
MAX_AXIS_VALUES = 100_000_000
#: seconds to wait for a Dask scheduler to answer (connect and first reply)
SCHEDULER_TIMEOUT_S = 15.0


class LimitError(WorkbenchError):
    """An input beyond a stated limit (one line: file, key, value, limit)."""


def _fail(error, msg):
    return (error or LimitError)(msg)


def check_toml_text(text: str, where: str, error=None) -> None:
    """Refuse TOML text that would make the parser itself run away, before parsing it.

    Checks the size (:data:`MAX_TEXT_BYTES`), every line's length (:data:`MAX_LINE_CHARS`), the
    number of parts of every key and table header (:data:`MAX_KEY_DEPTH`) and how deeply arrays and
    inline tables nest (:data:`MAX_NESTING`). A light scanner that knows TOML's strings, comments,
    arrays and inline tables; it does not validate the syntax (the parser does that afterwards).

    Parameters
    ----------
    text : str
        The file text.
    where : str
        The file name for the message.
    error : type, optional
        Exception class to raise (default :class:`LimitError`); called with the one-line message.
    """
    if len(text) > MAX_TEXT_BYTES:
        raise _fail(error, f"{where}: {len(text):,} characters; at most {MAX_TEXT_BYTES:,} are read "
                           f"(these files are a few kB of TOML)")
    start = 0
    lineno = 1
    n = len(text)
    while start <= n:
        end = text.find("\n", start)
        if end < 0:
            end = n
        if end - start > MAX_LINE_CHARS:
            raise _fail(error, f"{where}:{lineno}: line of {end - start:,} characters; at most "
                               f"{MAX_LINE_CHARS:,} characters per line")
        start = end + 1
        lineno += 1
    _scan_keys(text, where, error)


def _scan_keys(text: str, where: str, error) -> None:
    """Key depth and nesting of ``text`` (see :func:`check_toml_text`)."""
    i, n = 0, len(text)
    line = 1
    stack: list[str] = []          # "[" array, "{" inline table, "h" table header
    key_mode = True                # at a key position (line start, after '{' or ',' in a table)
    parts = 1                      # parts of the key being read
    while i < n:
        c = text[i]
        if c == "\n":
            line += 1
            if not stack or stack[-1] == "h":
                stack.clear()
                key_mode, parts = True, 1
            i += 1
            continue
        if c == "#":
            j = text.find("\n", i)
            i = n if j < 0 else j
            continue
        if c in "\"'":
            triple = text.startswith(c * 3, i)
            if triple:
                j = text.find(c * 3, i + 3)
                while j >= 0 and c == '"' and _escaped(text, j):
                    j = text.find(c * 3, j + 1)
                if j < 0:
                    return  # unterminated: the parser reports it
                line += text.count("\n", i, j)
                i = j + 3
                while i < n and text[i] == c:  # up to two more quotes belong to the string
                    i += 1
            else:
                j = i + 1
                while j < n and text[j] != c and text[j] != "\n":
                    j += 2 if (c == '"' and text[j] == "\\") else 1
                i = j + 1
            continue
        if key_mode:
            if c == ".":
                parts += 1
                if parts > MAX_KEY_DEPTH:
                    raise _fail(error, f"{where}:{line}: a key or table name of more than {MAX_KEY_DEPTH} "
                                       f"dotted parts; at most {MAX_KEY_DEPTH} (these files use 2)")
            elif c == "=":
                key_mode, parts = False, 1
            elif c == "[" and not stack:
                stack.append("h")
            elif c == "]" and stack and stack[-1] == "h":
                stack.pop()
                key_mode, parts = False, 1
            elif c == "}" and stack and stack[-1] == "{":
                stack.pop()
                key_mode = False
            i += 1
            continue
        # value position
        if c in "[{":
            stack.append(c)
            if len(stack) > MAX_NESTING:
                raise _fail(error, f"{where}:{line}: arrays or inline tables nested more than {MAX_NESTING} "
                                   f"deep; at most {MAX_NESTING}")
            if c == "{":
                key_mode, parts = True, 1
        elif c in "]}":
            if stack:
                stack.pop()
        elif c == "," and stack and stack[-1] == "{":
            key_mode, parts = True, 1
        i += 1


def _escaped(text: str, j: int) -> bool:
    k, back = j - 1, 0
    while k >= 0 and text[k] == "\\":
        back += 1
        k -= 1
    return back % 2 == 1


def check_count(value, where: str, limit: int, what: str = "values", error=None) -> int:
    """``value`` as an int when it is a whole number in [0, limit], else one line naming ``where``
    (file and key), the value and the limit."""
    if isinstance(value, bool):
        raise _fail(error, f"{where}: expected a whole number, got {value!r}")
    try:
        f = float(value)
    except (TypeError, ValueError, OverflowError):
        raise _fail(error, f"{where}: expected a whole number, got {value!r}") from None
    if not math.isfinite(f) or f != int(f):
        raise _fail(error, f"{where}: expected a whole number, got {value!r}")
    if f > limit:
        raise _fail(error, f"{where}: {int(f):,} {what}; at most {limit:,}")
    return int(f)


def check_magnitude(value: float, where: str, limit: float = MAX_MAGNITUDE, unit: str = "",
                    error=None) -> float:
    """``value`` when finite with ``|value| <= limit``, else one line naming it and the limit."""
    f = float(value)
    u = f" {unit}" if unit else ""
    if not math.isfinite(f):
        raise _fail(error, f"{where}: expected a finite number, got {value!r}")
    if abs(f) > limit:
        raise _fail(error, f"{where}: {value!r}{u} is beyond the limit of {limit:g}{u}")
    return f


def grid_count(lo: float, hi: float, step: float, where: str, limit: int = MAX_AXIS_VALUES,
               error=None) -> int:
    """Number of grid values ``lo, lo + step, ... <= hi`` checked against ``limit`` before any
    array is made (``step`` must be a finite positive number)."""
    for name, v in (("range", lo), ("range", hi), ("step", step)):
        if not math.isfinite(float(v)):
            raise _fail(error, f"{where}: {name} {v!r}: expected a finite number")
    if step <= 0:
        raise _fail(error, f"{where}: step {step!r}: expected a number > 0")
    count = math.floor((hi - lo) / step + 1e-9) + 1
    if count > limit:
        raise _fail(error, f"{where}: step {step:g} gives {count:,} values; at most {limit:,} "
                           f"(use a larger step)")
    return max(1, int(count))
