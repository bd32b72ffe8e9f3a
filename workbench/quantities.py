"""One registry of the quantities the workbench maps and tabulates (plain Python, no Qt).

Every place that names a measure for people reads it here: the studies (the description and the
unit of each output field), the window (axis labels, colour bars, legends, the histogram, the
pose-list headers), the report (table headers, figure labels, the side a reduction keeps) and
the command line (``workbench jacobian``, the PNG colour bar of ``workbench export``). A
:class:`Quantity` holds

``label``
    the name people read ("inverse condition 1/k"), without the unit;
``unit``
    the SI unit of the stored value ("" dimensionless); :data:`SV` and :data:`SV_PRODUCT` mark
    units that follow from the task rows and joint kinds (see :func:`measure_unit`);
``log``
    shown on a log10 scale (the condition number runs from 1 to infinity);
``better``
    "higher", "lower" or None (neither way is better);
``description``
    one sentence: what the number is.

A study field named ``<quantity>_<min|max|mean>`` (a reduced joint sweep) is the quantity
reduced over the other joints: :func:`quantity` finds the base entry. A name without an entry
gets a plain label from the name itself and no unit, scale or direction. A study kind added at
run time adds its quantities to :data:`QUANTITIES`.
"""
from __future__ import annotations

from dataclasses import dataclass, replace

__all__ = ["Quantity", "QUANTITIES", "SV", "SV_PRODUCT", "quantity", "label", "axis_label", "unit_of",
           "better", "is_log", "sign_of_better", "measure_unit", "best_of"]

#: unit marker: the unit of a singular value of the chosen task rows (see :func:`measure_unit`)
SV = "<singular value>"
#: unit marker: the unit of a product of the singular values (manipulability)
SV_PRODUCT = "<product of singular values>"

REDUCTIONS = ("min", "max", "mean")


@dataclass(frozen=True)
class Quantity:
    name: str
    label: str
    unit: str = ""
    log: bool = False
    better: str | None = None
    description: str = ""

    def __post_init__(self):
        if self.better not in ("higher", "lower", None):
            raise ValueError(f"quantity {self.name}: better must be 'higher', 'lower' or None, got {self.better!r}")


_Q = Quantity
_ENTRIES = (
    # ---- Jacobian measures (workbench.measures) ------------------------------------------------
    _Q("manipulability", "manipulability w", SV_PRODUCT, better="higher",
       description="product of singular values (Yoshikawa 1985); 0 at a singularity"),
    _Q("condition", "condition number k", "", log=True, better="lower",
       description="s1 / sm; 1 is isotropic, inf at a singularity"),
    _Q("inverse_condition", "inverse condition 1/k", "", better="higher",
       description="sm / s1 in [0, 1]; 0 singular, 1 isotropic"),
    _Q("min_sv", "minimum singular value", SV, better="higher",
       description="smallest singular value; 0 at a singularity"),
    _Q("limit_margin", "joint-limit margin", "", better="higher",
       description="smallest distance to a joint limit as a fraction of the half range (1 mid, 0 at a limit)"),
    _Q("limit_aware_manipulability", "limit-aware manipulability", SV_PRODUCT, better="higher",
       description="manipulability times the joint-limit penalty of Tsai 1986 "
                   "(workbench.measures.joint_limit_penalty); 0 at a limit"),
    _Q("reachability", "reachability index", "", better="higher",
       description="fraction of the sampled tool orientations reached"),
    _Q("reachable", "reachable", "", better="higher"),
    _Q("solutions", "IK solutions found", ""),
    # ---- mount search ---------------------------------------------------------------------------
    _Q("rank_value", "rank value (points served + quality)", "", better="higher",
       description="work points served + Q / (1 + Q): feasibility first, then quality"),
    _Q("served", "work points served", "", better="higher"),
    _Q("score", "quality Q", "", better="higher"),
    _Q("reached_fraction", "fraction of work points reached", "", better="higher"),
    _Q("worst_measure", "worst measure", "", better="higher"),
    _Q("min_margin", "smallest limit margin", "", better="higher"),
    _Q("min_torque_margin", "smallest torque margin", "", better="higher"),
    _Q("min_clearance", "smallest clearance", "m", better="higher"),
    _Q("min_obstacle_clearance", "smallest clearance to the obstacles", "m", better="higher"),
    _Q("base_clearance", "base clearance", "m", better="higher"),
    _Q("point_measure", "measure at the work point", "", better="higher"),
    _Q("point_clearance", "clearance at the work point", "m", better="higher"),
    # ---- path audit -----------------------------------------------------------------------------
    _Q("margin", "limit margin", "", better="higher",
       description="joint-limit margin (1 mid range, 0 at a limit)"),
    _Q("speed_ratio", "joint-speed ratio (needed / limit)", "", better="lower",
       description="largest |joint speed| / joint speed limit"),
    _Q("accel_ratio", "joint-acceleration ratio (needed / limit)", "", better="lower"),
    _Q("tool_speed_max", "largest tool speed", "m/s", better="higher"),
    _Q("torque_margin", "torque margin", "", better="higher"),
    _Q("clearance", "clearance", "m", better="higher"),
    _Q("qdot", "joint speed", "rad/s"),
    _Q("tau", "holding torque", "N m"),
    _Q("min_inverse_condition", "lowest inverse condition", "", better="higher"),
    _Q("worst_speed_ratio", "worst speed needed / limit", "", better="lower"),
    # ---- load map -------------------------------------------------------------------------------
    _Q("payload", "payload", "kg", better="higher",
       description="largest payload at its centre of mass within every joint's torque limit"),
    _Q("force", "largest force", "N", better="higher"),
    _Q("own_load", "own load (gravity torque / limit)", "", better="lower",
       description="largest |gravity torque of the arm itself| / torque limit"),
    _Q("min_payload", "smallest payload", "kg", better="higher"),
    _Q("median_payload", "median payload", "kg", better="higher"),
    _Q("max_payload", "largest payload", "kg", better="higher"),
)

#: name -> :class:`Quantity`
QUANTITIES: dict[str, Quantity] = {q.name: q for q in _ENTRIES}


def _base(name: str) -> tuple[str, str | None]:
    name = str(name)
    if name not in QUANTITIES:
        head, _, op = name.rpartition("_")
        if op in REDUCTIONS and head in QUANTITIES:
            return head, op
    return name, None


def quantity(name: str) -> Quantity:
    """The entry of ``name`` (a reduced field ``<name>_<op>`` gets its base's entry with the
    reduction in the label); a name without an entry gets a plain one (no unit, no direction)."""
    base, op = _base(name)
    q = QUANTITIES.get(base)
    if q is None:
        return Quantity(str(name), str(name).replace("_", " "))
    if op is None:
        return q
    return replace(q, name=str(name), label=f"{q.label} ({op} over the other joints)",
                   description=f"{op} over the other joints of: {q.description}" if q.description else "")


def label(name: str) -> str:
    """The label people read (no unit)."""
    return quantity(name).label


def unit_of(name: str, rows=None, joint_kinds=None) -> str:
    """The unit of ``name`` as stored; row-dependent units via :func:`measure_unit` (None when
    the rows and joints give no single unit, or are not known)."""
    u = quantity(name).unit
    if u in (SV, SV_PRODUCT):
        if rows is None or joint_kinds is None:
            return None
        return measure_unit(u, rows, joint_kinds)
    return u


def axis_label(name: str, unit: str | None = None, log: bool | None = None) -> str:
    """Label with the unit and the scale, as an axis, a colour bar or a table header shows it:
    ``"log10 condition number k"``, ``"payload (kg)"``. ``unit`` overrides the registry's (a
    field's own unit); ``log`` whether the values shown are log10 (default: the registry's)."""
    q = quantity(name)
    if unit is None:
        unit = q.unit if q.unit not in (SV, SV_PRODUCT) else ""
    text = q.label + (f" ({unit})" if unit else "")
    if q.log if log is None else log:
        text = f"log10 {text}"
    return text


def better(name: str) -> str | None:
    return quantity(name).better


def is_log(name: str) -> bool:
    return quantity(name).log


def sign_of_better(name: str) -> float:
    """-1.0 where lower is better, else 1.0: ``sign * value`` is largest at the best value."""
    return -1.0 if quantity(name).better == "lower" else 1.0


def best_of(name: str) -> str:
    """Which end of a set of values of ``name`` is the best: "max" (better higher or unknown)
    or "min" (better lower). Used where a map keeps the best value over extra axes."""
    return "min" if quantity(name).better == "lower" else "max"


# ---- units that follow from the task rows ----------------------------------------------------

def _power(p: int) -> str:
    if p == 0:
        return ""
    if p == 1:
        return "m"
    if p == -1:
        return "1/m"
    return f"m^{p}" if p > 0 else f"1/m^{-p}"


def measure_unit(marker: str, rows, joint_kinds) -> str | None:
    """The SI unit of a singular value (``SV``) or of the product of the ``m`` singular values
    (``SV_PRODUCT``) of the task rows ``rows`` (a name such as "translation", row names or indices 0..5 of vx vy vz wx wy wz) of the
    Jacobian of an arm with joints ``joint_kinds`` (0 revolute, 1 prismatic; or "revolute" /
    "prismatic").

    A Jacobian entry is m/rad (translation row, revolute joint), m/m (translation, prismatic),
    rad/rad (rotation, revolute) or rad/m (rotation, prismatic); radians count as 1. Selections
    mixing translation and rotation rows divide the translation rows by the characteristic
    length (m) (workbench.kinematics.rows.row_scale). The singular values have one unit only
    when every entry has the same one: m^p; their product over m rows m^(p m) (0 when there are
    more rows than joints: unit as if not). Returns None when the entries differ (no single
    unit)."""
    from .kinematics.rows import parse_rows

    rows = list(parse_rows(rows))
    kinds = [0 if k in (0, "revolute", "R") else 1 for k in joint_kinds]
    mixed = any(r < 3 for r in rows) and any(r >= 3 for r in rows)
    powers = set()
    for r in rows:
        for k in kinds:
            p = (1 if r < 3 else 0) - (1 if k == 1 else 0) - (1 if (mixed and r < 3) else 0)
            powers.add(p)
    if len(powers) != 1:
        return None
    p = powers.pop()
    if marker == SV_PRODUCT:
        p *= len(rows)
    return _power(p)
