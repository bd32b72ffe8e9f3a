"""`workbench bench` runs and reports; speed is *measured* there, never asserted here.

No assertion below depends on how fast the machine is: rates are only checked to be positive, and
the exit status is checked to agree with the PASS/FAIL of the bars, whatever they were.
"""
import json

from workbench.bench import bench_kernel, format_results
from workbench.cli.bench import failed_bars
from workbench.cli import main


def test_kernel_bench_reports_rates_ratios_and_accuracy():
    res = bench_kernel(quick=True)
    m = res["metrics"]
    for tag in ("demo_u6", "demo_s6"):  # a URDF import and a TOML arm, both public paths
        assert m[f"{tag}_pose_measures_poses_per_s"] > 0
        assert m[f"{tag}_measures_of_jacobian_poses_per_s"] > 0
        assert m[f"{tag}_numpy_batched_poses_per_s"] > 0
        assert f"{tag}_pose_measures_vs_numpy>=20" in res["bars"]
        assert f"{tag}_measures_of_jacobian_vs_numpy>=20" in res["bars"]
    assert m["per_pose_loop_poses_per_s"] > 0
    # accuracy is not a timing: singular values within 1e-9 * s1 of numpy's SVD (DESIGN §8),
    # including exactly singular wrists
    assert m["max_sv_error_over_s1"] < 1e-9
    assert res["bars"]["sv_error<=1e-9*s1"][2]
    # the engine and the reference compute the same measures on the same poses
    assert m["max_inverse_condition_difference"] < 1e-9
    for value, threshold, passed in res["bars"].values():
        assert passed == (value >= threshold if threshold >= 1 else value <= threshold)
    text = format_results([res])
    assert "ratio vs_numpy_batched" in text


def test_failed_bars_lists_each_failure():
    results = [{"name": "a", "bars": {"x>=2": [1.0, 2.0, False], "y>=1": [3.0, 1.0, True]}},
               {"name": "b", "skipped": "not available"}]
    assert failed_bars(results) == ["a: x>=2"]


def test_bench_cli_json_and_bad_entry(capsys):
    status = main(["bench", "--quick", "--only", "kernel", "--json"])
    captured = capsys.readouterr()
    out = json.loads(captured.out)
    assert out[0]["name"] == "kernel" and out[0]["ratios"]["vs_numpy_batched"] > 0
    # the exit status follows the bars (whichever way this machine's timings went)
    failed = [k for k, (_v, _t, ok) in out[0]["bars"].items() if not ok]
    assert status == (1 if failed else 0)
    assert ("bar(s) failed" in captured.err) == bool(failed)
    assert main(["bench", "--only", "nonsense"]) == 2
    err = capsys.readouterr().err
    assert err.startswith("error: --only: unknown bench entry 'nonsense'") and err.count("\n") == 1


def test_bench_exit_status_is_one_when_any_bar_fails(monkeypatch, capsys):
    # a bar that fails must fail the command (a script or CI sees it), one that passes must not
    import workbench.bench as b

    def fake(quick=False):
        return {"name": "fake", "metrics": {}, "ratios": {},
                "bars": {"good>=1": [2.0, 1.0, True], "bad>=5": [4.0, 5.0, False]}, "notes": []}

    def fine(quick=False):
        return {"name": "fine", "metrics": {}, "ratios": {}, "bars": {"good>=1": [2.0, 1.0, True]}, "notes": []}

    monkeypatch.setattr(b, "ENTRIES", [("fake", "tests.test_bench:_unused")])
    monkeypatch.setattr(b, "run_benches", lambda names, quick, log: [fake(), fine()])
    assert main(["bench", "--quick"]) == 1
    captured = capsys.readouterr()
    assert "FAIL bad>=5" in captured.out and "PASS good>=1" in captured.out
    assert "bench: 1 bar(s) failed: fake: bad>=5" in captured.err
    monkeypatch.setattr(b, "run_benches", lambda names, quick, log: [fine()])
    assert main(["bench", "--quick"]) == 0
