"""Shared paths of the fluxstep Python tests."""

import pathlib

import pytest

ROOT = pathlib.Path(__file__).resolve().parents[3]


@pytest.fixture
def root():
    return ROOT


@pytest.fixture
def examples():
    return ROOT / "examples" / "circuits"
