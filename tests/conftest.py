"""Fixtures shared by the physics tests."""
import pytest

from helpers import solver_params


@pytest.fixture(scope="module", **solver_params())
def solver(request):
    """Every physics test runs on each solver of the catalogue (reference and compiled)."""
    return request.param
