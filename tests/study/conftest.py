"""Fixtures of the study tests."""

import pytest
from studyhelp import GRID_STUDY, write


@pytest.fixture
def grid_study(tmp_path):
    return write(tmp_path, GRID_STUDY.replace("{output_extra}", ""))
