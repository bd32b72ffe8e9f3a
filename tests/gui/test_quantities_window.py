"""The window's axis labels, measure choices, histogram and pose-list headers come from the
quantity registry (workbench/quantities.py): change an entry and the window shows the change."""
from dataclasses import replace
from pathlib import Path

from workbench import quantities as Q

ROOT = Path(__file__).resolve().parents[2]
ARM = (ROOT / "arms" / "demo_planar2r.toml").as_posix()


def test_window_labels_follow_the_registry(window, tmp_path, monkeypatch):
    from workbench.runner import run_study

    study = tmp_path / "s.toml"
    study.write_text(f'[study]\nname = "labels"\nkind = "joint_sweep"\narm = "{ARM}"\n[settings]\n'
                     f'mode = "grid"\njoints = ["th1", "th2"]\nranges = [[0, 90], [-90, 90]]\nsteps = [3, 5]\n'
                     f'rows = "vx,vy"\n')
    run_study(str(study), out=str(tmp_path / "r.h5"), executor="inprocess")
    monkeypatch.setitem(Q.QUANTITIES, "manipulability",
                        replace(Q.QUANTITIES["manipulability"], label="w from the registry"))
    monkeypatch.setitem(Q.QUANTITIES, "condition", replace(Q.QUANTITIES["condition"], label="k from the registry"))
    assert window.open_file(str(tmp_path / "r.h5")), window.last_error
    mv, hv = window.map_view, window.hist_view
    items = [mv.measure_combo.itemText(i) for i in range(mv.measure_combo.count())]
    # the unit is the one the study stored: w of the rows vx, vy of a 2R arm is in m^2
    assert "w from the registry (m^2)" in items and "log10 k from the registry" in items
    mv.measure_combo.setCurrentIndex(mv.measure_combo.findData("manipulability"))
    assert mv.plot.getPlotItem().titleLabel.text.endswith("w from the registry (m^2)")
    hv.set_measure("condition", None)
    assert hv.plot.getAxis("bottom").labelText == "log10 k from the registry"
    model = window.pose_list.model
    from PySide6 import QtCore

    heads = [model.headerData(c, QtCore.Qt.Horizontal) for c in range(model.columnCount())]
    assert "w from the registry (m^2)" in heads and "k from the registry" in heads   # the list shows k itself
