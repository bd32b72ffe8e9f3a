"""Fixtures shared by several test modules."""
import pytest


@pytest.fixture(scope="session")
def small_cell_results(tmp_path_factory):
    """Results of a small mount search, path audit and load map (tests/reportcell.py), run once:
    ``(folder, {"ms": Results, "pa": ..., "lm": ...})``."""
    from reportcell import make_results

    d = tmp_path_factory.mktemp("small_cell")
    return d, make_results(d)


# ---------------------------------------------------------------------------------------------
# no process outlives the test that started it (a hung child must fail its test, never keep the
# test session or CI waiting)


def _cli_children():
    import os

    import psutil

    found = []
    for p in psutil.Process(os.getpid()).children(recursive=True):
        try:
            cmd = " ".join(p.cmdline())
        except (psutil.NoSuchProcess, psutil.AccessDenied, psutil.ZombieProcess):
            continue
        if "-m workbench" in cmd or "/workbench " in cmd or cmd.endswith("/workbench"):
            found.append(p)
    return found


def _kill_tree(procs):
    import psutil

    everyone = []
    for p in procs:
        try:
            everyone += [p] + p.children(recursive=True)
        except psutil.NoSuchProcess:
            pass
    for p in everyone:
        try:
            p.kill()
        except psutil.NoSuchProcess:
            pass
    psutil.wait_procs(everyone, timeout=10)
    return everyone


@pytest.fixture(autouse=True)
def _no_leftover_cli_runs():
    """After every test: a ``workbench`` command the test started and left running (a hang, a
    failed assertion before its wait) is killed with everything it started."""
    before = {p.pid for p in _cli_children()}
    yield
    left = [p for p in _cli_children() if p.pid not in before]
    if left:
        _kill_tree(left)


def pytest_sessionfinish(session, exitstatus):
    """Whatever child processes are left when the session ends (worker pools, clusters, command
    runs) are killed, so the test command always returns."""
    import os

    import psutil

    _kill_tree(psutil.Process(os.getpid()).children(recursive=False))
