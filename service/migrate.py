"""``python -m service.migrate``: apply, inspect or write schema migrations.

The database is the one the service would use: ``EMF_DATABASE_URL`` (and the other
``EMF_*`` settings, read as service.create_app reads them), else the SQLite file in the
instance folder.  Commands:

    upgrade [REVISION]      migrate to REVISION (default: head), under the start-up lock
    downgrade REVISION      undo migrations down to REVISION ("base": drop the tables)
    current                 the database's revision and this release's head
    history                 the packaged revisions, newest first
    stamp REVISION          record REVISION without running migrations (repairs only)
    revision -m MESSAGE [--autogenerate]
                            write the next revision script into service/migrations/versions
                            (--autogenerate: compared with the database, which must be at head)

Exit status 0 on success, 1 when the schema cannot be used or migrated (message on stderr).
"""

from __future__ import annotations

import argparse
import logging
import sys
from collections.abc import Sequence

from alembic import command
from alembic.util import CommandError
from flask import Flask
from sqlalchemy import Engine

from . import config as settings
from . import schema_migrations as sm
from . import storage


def database_engine() -> Engine:
    """Engine for the database the service would use with the current environment."""
    app = Flask("service", instance_relative_config=True)  # same instance folder as create_app
    settings.load(app.config)
    return storage.make_engine(storage.database_url(app))


def current(engine: Engine) -> str:
    """One line: the database's revision and whether it is this release's head."""
    head = sm.head_revision()
    with engine.connect() as conn:
        at_head = sm.current_revisions(conn) == (head,)
        where = sm.describe(conn)
    if at_head:
        return f"Database at {where} (head)."
    return f"Database at {where}; this release's head is {head!r}: run `{sm.UPGRADE_COMMAND}`."


def next_revision_id() -> str:
    """Revisions are numbered 0001, 0002, ... (the script file names start with the number)."""
    return f"{int(sm.head_revision()) + 1:04d}"


def parser() -> argparse.ArgumentParser:
    cli = argparse.ArgumentParser(prog="python -m service.migrate",
                                  description="Apply, inspect or write the service's schema migrations.",
                                  epilog=__doc__.split("\n\n", 1)[1].replace("``", ""),
                                  formatter_class=argparse.RawDescriptionHelpFormatter)
    sub = cli.add_subparsers(dest="command", required=True)
    sub.add_parser("upgrade", help="migrate to a revision (default head)").add_argument(
        "revision", nargs="?", default="head")
    sub.add_parser("downgrade", help="undo migrations down to a revision").add_argument("revision")
    sub.add_parser("current", help="show the database's revision")
    sub.add_parser("history", help="list the packaged revisions")
    sub.add_parser("stamp", help="record a revision without migrating").add_argument("revision")
    revision = sub.add_parser("revision", help="write a new revision script")
    revision.add_argument("-m", "--message", required=True)
    revision.add_argument("--autogenerate", action="store_true")
    return cli


def main(argv: Sequence[str] | None = None) -> int:
    args = parser().parse_args(argv)
    logging.basicConfig(level=logging.INFO, format="%(message)s")
    for handler in logging.getLogger().handlers:  # keep "Running upgrade ...", drop alembic's set-up chatter
        handler.addFilter(lambda record: not record.getMessage().startswith(("Context impl", "Will assume", "setting up")))
    if args.command == "history":
        command.history(sm.alembic_config())
        return 0
    engine = database_engine()
    try:
        if args.command == "upgrade":
            sm.upgrade(engine, args.revision)
        elif args.command == "downgrade":
            sm.downgrade(engine, args.revision)
        elif args.command == "stamp":
            sm.stamp(engine, args.revision)
        elif args.command == "revision":
            with engine.connect() as conn:
                command.revision(sm.alembic_config(conn), message=args.message,
                                 autogenerate=args.autogenerate, rev_id=next_revision_id())
            return 0
        print(current(engine))
        return 0
    except (sm.SchemaStateError, CommandError) as exc:
        print(f"error: {exc}", file=sys.stderr)
        return 1
    finally:
        engine.dispose()


if __name__ == "__main__":
    sys.exit(main())
