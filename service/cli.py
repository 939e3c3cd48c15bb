"""The ``dotledger`` command line."""

from __future__ import annotations

import sys
from pathlib import Path

import click

from service.app import create_app

__all__ = ["main"]


def _app():
    return create_app()


def _catalogue(app):
    from service.chem.substances import load_catalogue

    return load_catalogue(app.config["RULES_DIR"])[0]


def _sessions(app):
    return app.extensions["dotledger.sessions"]


def _init(app) -> tuple[int, int]:
    from service.store import inventory
    from service.store.db import session_scope, upgrade

    upgrade(app.config["DATABASE_URL"])
    with session_scope(_sessions(app)) as session:
        return inventory.sync_catalogue(session, _catalogue(app))


@click.group()
@click.version_option(package_name="dotledger")
def main() -> None:
    """dotledger: inventory, mass balance and waste records for nanocrystal labs.

    Suggestions only: classification and approval rest with local regulations and the
    site safety officer.
    """


@main.command()
def init() -> None:
    """Create or upgrade the database and load the substance catalogue."""
    app = _app()
    added, updated = _init(app)
    click.echo(f"database ready at {app.config['DATABASE_URL']}; catalogue: {added} substance(s) added, {updated} updated")


@main.command()
def demo() -> None:
    """Load the invented demonstration scenario (safe to run again)."""
    from service.store.db import session_scope
    from service.store.demo import SITE_NAME, load_demo

    app = _app()
    _init(app)
    with session_scope(_sessions(app)) as session:
        added = load_demo(session, _catalogue(app))
    click.echo(f"demo scenario {SITE_NAME!r}: " + ", ".join(f"{n} {k} added" for k, n in added.items()))


@main.command()
@click.option("--host", default="127.0.0.1", show_default=True)
@click.option("--port", default=8000, show_default=True, type=int)
def serve(host: str, port: int) -> None:
    """Serve the web pages and the API."""
    from waitress import serve as waitress_serve

    app = _app()
    click.echo(f"dotledger on http://{host}:{port}/ (database {app.config['DATABASE_URL']}); Ctrl-C stops")
    waitress_serve(app, host=host, port=port, threads=8)


@main.command("import-inventory")
@click.argument("file", type=click.Path(exists=True, dir_okay=False, path_type=Path))
@click.option("--dry-run", is_flag=True, help="Check every row and report, write nothing.")
@click.option("--report", "report_path", type=click.Path(dir_okay=False, path_type=Path),
              help="Also write the rejected rows to this CSV file.")
def import_inventory_command(file: Path, dry_run: bool, report_path: Path | None) -> None:
    """Import stocks from a CSV or XLSX spreadsheet; rejected rows are listed with the reason.

    The valid rows are written in one transaction: all of them or, on any failure, none.
    """
    from service.errors import InvalidInput
    from service.store.db import session_scope
    from service.store.importer import import_inventory, read_table

    app = _app()
    _init(app)
    catalogue = _catalogue(app)
    try:
        frame = read_table(file)
    except InvalidInput as exc:
        raise click.ClickException(str(exc)) from None

    def lookup(text: str):
        entry = catalogue.find(text)
        return entry.key if entry else None

    with session_scope(_sessions(app)) as session:
        with click.progressbar(length=len(frame), label="checking rows", file=sys.stderr) as bar:
            report = import_inventory(session, frame, catalogue_lookup=lookup, dry_run=dry_run, progress=bar.update)
    for row in report.rejected:
        click.echo(f"line {row.line} ({row.label or 'no label'}): {row.reason}")
    if report_path is not None:
        report.to_frame().to_csv(report_path, index=False)
    verb = "would import" if dry_run else "imported"
    click.echo(
        f"{report.rows} row(s) read: {verb} {report.imported}, rejected {len(report.rejected)}"
        + (f", {report.locations_created} new location(s)" if report.locations_created else "")
    )
