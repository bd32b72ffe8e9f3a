"""Settings-form logic: field text <-> values, and one reason per bad field (pure, no Qt)."""
import pytest

from workbench import load_arm
from workbench.errors import WorkbenchError
from workbench.gui.formlogic import check_fields, format_value, parse_value
from workbench.studies import get_kind

DEMO = "arms/demo_s6.toml"


def test_parse_and_format_round_trip():
    for v in (3, 2.5, "tcp", [1, 2], [[-140.0, 90.0], [0, 1]], ["j2", "j3"], True):
        assert parse_value(format_value(v)) == v
    assert parse_value("j2, j3") == ["j2", "j3"]
    with pytest.raises(WorkbenchError, match="not a value"):
        parse_value("[1, 2")
    with pytest.raises(WorkbenchError, match="empty"):
        parse_value("  ")


def test_each_bad_field_gets_its_own_reason():
    arm = load_arm(DEMO)
    kind = get_kind("joint_sweep")
    defaults = kind.default_settings(arm)
    texts = {k: format_value(v) for k, v in defaults.items()}
    values, errors, summary = check_fields(kind, texts, defaults, arm)
    assert errors == {} and summary == ""
    texts.update(steps="[0, 5]", frame="nowhere", ranges="[[10, 0], [0, 1]]")
    values, errors, summary = check_fields(kind, texts, defaults, arm)
    assert set(errors) == {"steps", "frame", "ranges"}
    assert "at least 1" in errors["steps"]
    assert "nowhere" in errors["frame"]
    assert "empty range" in errors["ranges"]
    texts = {k: format_value(v) for k, v in defaults.items()}
    texts["steps"] = "[10, 10, 10]"       # three step counts for two joints: a cross-field error
    _, errors, _ = check_fields(kind, texts, defaults, arm)
    assert list(errors) == ["steps"] and "2 whole numbers" in errors["steps"]
