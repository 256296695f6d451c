"""Alembic environment: runs migrations against the URL set by ``calcsvc.data.database.upgrade``."""

from alembic import context
from sqlalchemy import create_engine

from calcsvc.data.models import Base

config = context.config
url = config.get_main_option("sqlalchemy.url")
assert url is not None

engine = create_engine(url)
with engine.connect() as connection:
    # Batch mode lets ALTERs run on SQLite, which rebuilds the table instead.
    context.configure(
        connection=connection,
        target_metadata=Base.metadata,
        render_as_batch=connection.dialect.name == "sqlite",
    )
    with context.begin_transaction():
        context.run_migrations()
engine.dispose()
