"""`workbench bench` runs and reports; speed is *measured* there, never asserted here."""
import json

from workbench.bench import bench_kernel, format_results
from workbench.cli import main


def test_kernel_bench_reports_rates_ratios_and_accuracy():
    res = bench_kernel(quick=True)
    m = res["metrics"]
    assert m["engine_poses_per_s"] > 0 and m["numpy_batched_poses_per_s"] > 0
    assert m["per_pose_loop_poses_per_s"] > 0
    # accuracy is not a timing: singular values within 1e-9 * s1 of numpy's SVD (DESIGN §8)
    assert m["max_sv_error_over_s1"] < 1e-9
    # the engine and the reference compute the same measures on the same poses
    assert m["max_inverse_condition_difference"] < 1e-9
    assert set(res["bars"]) == {"kernel_vs_numpy_batched>=5", "kernel_vs_per_pose_loop>=500", "sv_error<=1e-9*s1"}
    text = format_results([res])
    assert "ratio vs_numpy_batched" in text


def test_bench_cli_json_and_bad_entry(capsys):
    assert main(["bench", "--quick", "--only", "kernel", "--json"]) == 0
    out = json.loads(capsys.readouterr().out)
    assert out[0]["name"] == "kernel" and out[0]["ratios"]["vs_numpy_batched"] > 0
    assert main(["bench", "--only", "nonsense"]) == 2
    err = capsys.readouterr().err
    assert err.startswith("error: --only: unknown bench entry 'nonsense'") and err.count("\n") == 1
