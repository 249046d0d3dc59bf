"""Alembic environment of the packaged migrations (``service/migrations``).

There is no ``alembic.ini``: :mod:`service.schema_migrations` (used at start-up and by
``python -m service.migrate``) builds the configuration and passes an open connection,
already inside the transaction that holds the migration lock, as
``config.attributes["connection"]``.  The migrations run in that transaction
(alembic does not begin or commit its own), so a failed upgrade leaves nothing behind
on PostgreSQL and SQLite alike.
"""

from __future__ import annotations

from typing import Any

from alembic import context
from sqlalchemy import TypeDecorator

from service.storage import Base


def render_item(type_: str, obj: Any, autogen_context: Any) -> str | bool:
    """Autogenerate writes a column type of our own (``UTCDateTime``) as its SQLAlchemy type.

    Revision scripts must not import the service's current models: they describe the
    schema as it was at their revision.
    """
    if type_ == "type" and isinstance(obj, TypeDecorator):
        return "sa." + repr(obj.impl)
    return False


connection = context.config.attributes.get("connection")
if context.is_offline_mode() or connection is None:
    raise RuntimeError("Run the migrations with `python -m service.migrate` (no alembic.ini, no --sql mode).")

context.configure(
    connection=connection,
    target_metadata=Base.metadata,
    # SQLite cannot ALTER most things: later revisions use op.batch_alter_table, which
    # copies the table there ("move and copy") and alters it in place elsewhere.
    render_as_batch=connection.dialect.name == "sqlite",
    render_item=render_item,
)
with context.begin_transaction():
    context.run_migrations()
