"""Shared test settings.

The "ci" hypothesis profile has no deadline: the first call of a compiled
(numba) kernel includes its compilation, which no per-example deadline
should count against. Every test is checked to leave the working directory as it
found it.
"""
import os

import pytest
from hypothesis import settings

settings.register_profile("ci", deadline=None, max_examples=50)
settings.load_profile("ci")

# What the test tools themselves keep in the working directory.
_TOOL_CACHES = {".hypothesis", ".pytest_cache", "__pycache__"}


@pytest.fixture(autouse=True)
def _writes_nothing_into_the_working_directory():
    """No test writes into the working directory: outputs go to ``tmp_path``. A test that
    leaves a new file or folder there fails, naming it."""
    before = set(os.listdir(os.getcwd()))
    yield
    new = set(os.listdir(os.getcwd())) - before - _TOOL_CACHES
    assert not new, f"the test wrote {sorted(new)} into the working directory {os.getcwd()}"
