"""The service layer called directly, without a server: the root fixtures' database, seeded."""

from __future__ import annotations

import pytest
from flask import Flask

from calcsvc.data.database import Database


@pytest.fixture
def database(seeded: Flask) -> Database:
    db: Database = seeded.extensions["calcsvc.db"]
    return db
