"""Test-session settings shared by every test module."""

from __future__ import annotations

import os

import pytest


@pytest.fixture(autouse=True, scope="session")
def _board_cache_in_a_temporary_folder(tmp_path_factory: pytest.TempPathFactory) -> None:
    """Boards the tests load are cached (models.board_cache) in a folder of this session,
    never in the user's own cache; commands the tests start as processes inherit it."""
    os.environ["SCANLOOM_CACHE"] = str(tmp_path_factory.mktemp("board-cache"))
