"""The parts generation: one value that every write to the parts tables replaces with a new random one.

A worker caches the part revisions a request references under the generation it read them at, and checks the
generation alone on the next request (calcsvc.data.part_lookup). Triggers set it, so every writer is covered:
this service's workers and processes, the parts tool, a later migration, an administrator's SQL. A random value
rather than a counter, so a database dropped and created again, or restored from a backup, never shows a worker
a generation it cached other contents under.

No existing table is changed.

Revision ID: 0007
Revises: 0006
Create Date: 2026-12-03
"""

import secrets

import sqlalchemy as sa
from alembic import op

revision = "0007"
down_revision = "0006"
branch_labels = None
depends_on = None

TABLES = ("parts", "part_revisions")
OPERATIONS = ("insert", "update", "delete")
_NEW_GENERATION_PG = "UPDATE parts_generation SET generation = floor(random() * 9007199254740991)::bigint"


def upgrade() -> None:
    op.create_table("parts_generation", sa.Column("generation", sa.BigInteger(), nullable=False))
    op.execute(sa.text("INSERT INTO parts_generation (generation) VALUES (:g)").bindparams(g=secrets.randbits(53)))
    if op.get_bind().dialect.name == "postgresql":
        op.execute(
            "CREATE FUNCTION parts_changed() RETURNS trigger LANGUAGE plpgsql AS "
            f"$$ BEGIN {_NEW_GENERATION_PG}; RETURN NULL; END $$"
        )
        for table in TABLES:
            # Once per statement: a bulk import replaces the value once, not once per row.
            op.execute(
                f"CREATE TRIGGER {table}_changed AFTER INSERT OR UPDATE OR DELETE OR TRUNCATE ON {table} "
                "FOR EACH STATEMENT EXECUTE FUNCTION parts_changed()"
            )
        return
    for table in TABLES:
        for operation in OPERATIONS:  # SQLite has row triggers only
            op.execute(
                f"CREATE TRIGGER {table}_{operation}_changed AFTER {operation.upper()} ON {table} "
                "BEGIN UPDATE parts_generation SET generation = random(); END"
            )


def downgrade() -> None:
    if op.get_bind().dialect.name == "postgresql":
        for table in TABLES:
            op.execute(f"DROP TRIGGER {table}_changed ON {table}")
        op.execute("DROP FUNCTION parts_changed()")
    else:
        for table in TABLES:
            for operation in OPERATIONS:
                op.execute(f"DROP TRIGGER {table}_{operation}_changed")
    op.drop_table("parts_generation")
