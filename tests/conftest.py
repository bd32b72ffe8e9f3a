"""Fixtures shared by several test modules."""
import pytest


@pytest.fixture(scope="session")
def small_cell_results(tmp_path_factory):
    """Results of a small mount search, path audit and load map (tests/reportcell.py), run once:
    ``(folder, {"ms": Results, "pa": ..., "lm": ...})``."""
    from reportcell import make_results

    d = tmp_path_factory.mktemp("small_cell")
    return d, make_results(d)
