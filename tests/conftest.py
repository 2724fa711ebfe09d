"""Shared fixtures: every test runs in its own temporary directory, with fixed seeds."""

from __future__ import annotations

import os
import random

import numpy as np
import pytest


@pytest.fixture(autouse=True)
def _in_tmp_dir(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    random.seed(0)
    np.random.seed(0)
    yield


@pytest.fixture(autouse=True, scope="session")
def _threads():
    os.environ.setdefault("OMP_NUM_THREADS", "1")
    yield
