"""Shared set-up of the Python package's tests (pytest, run by ctest as
python_api with AEROSECT = the program, AEROSECT_SOURCE = the source tree and
PYTHONPATH = the build tree's python/ folder; see tests/CMakeLists.txt)."""

import os
import subprocess

import pytest

AEROSECT = os.environ.get("AEROSECT", "")
SOURCE = os.environ.get("AEROSECT_SOURCE", os.path.dirname(os.path.dirname(os.path.dirname(os.path.abspath(__file__)))))


@pytest.fixture(scope="session")
def program():
    if not AEROSECT or not os.access(AEROSECT, os.X_OK):
        pytest.fail("set AEROSECT to the aerosect program (ctest does)")
    return AEROSECT


@pytest.fixture(scope="session")
def source():
    return SOURCE


def run_cli(program, args, check=True):
    """Runs the program; returns the CompletedProcess (text)."""
    p = subprocess.run([program, *args], capture_output=True, text=True, timeout=600)
    if check and p.returncode != 0:
        raise AssertionError(f"aerosect {' '.join(args)} exited {p.returncode}:\n{p.stderr}")
    return p
