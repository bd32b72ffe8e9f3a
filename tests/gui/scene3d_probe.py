"""Run under a real (virtual) display by test_scene_clearance.py: draws the two-capsule test arm
and cell in the 3D scene and prints what it drew as JSON."""
import json
import os
import sys

import numpy as np

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))


def main(folder):
    import test_scene_clearance as T

    from workbench.arm import read_arm_model
    from workbench.gui.app import make_app
    from workbench.gui.cellview import cell_content, pose_clearance
    from workbench.gui.posestate import PoseState
    from workbench.gui.qtfix import guard
    from workbench.gui.scene import KEEP_OUT_COLOUR, make_scene
    from workbench.kinematics import Arm
    from workbench.studies.cell import read_cell_file

    app = make_app()
    guard()
    a, c = os.path.join(folder, "a.toml"), os.path.join(folder, "c.toml")
    open(a, "w").write(T.ARM)
    open(c, "w").write(T.CELL)
    arm, cell = Arm(read_arm_model(a)), read_cell_file(c)
    sc, note = make_scene()
    out = {"is_3d": bool(sc.is_3d), "note": note}
    if not sc.is_3d:
        print(json.dumps(out))
        return
    sc.resize(800, 600)
    sc.show()
    sc.set_cell(cell_content(cell))
    sc.fit([-1.3, -0.5, 0], [1.1, 1.4, 2.0])
    q = np.zeros(3)
    pc = pose_clearance(arm, q, cell)
    sc.set_pose(PoseState(arm).compute(q))
    sc.set_bodies(arm, q, pc)
    sc.set_recommended([0.5, 0.5, 0.0])
    for _ in range(5):
        app.processEvents()
    img = sc.view.grabFramebuffer()
    w, h = img.width(), img.height()
    amber = 0
    for y in range(0, h, 2):
        for x in range(0, w, 2):
            col = img.pixelColor(x, y)
            if all(abs(v - k) < 40 for v, k in zip((col.red(), col.green(), col.blue()), KEEP_OUT_COLOUR)):
                amber += 1
    out.update(keepout_type=type(sc.keepout).__name__, boxes_type=type(sc.boxes).__name__,
               keepout_points=int(len(sc.keepout.pos)), shape_colours={str(b): list(it.opts["color"])
                                                                      for b, it in sc._shape_items},
               amber_pixels=amber, recommended=sc.recommended().tolist(), obstacles=len(sc._obstacle_meshes))
    print(json.dumps(out))


if __name__ == "__main__":
    main(sys.argv[1])
