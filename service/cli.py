"""The ``dotledger`` command line.

The console script is ``service.console:main``: this group with the commands of the other
top-layer packages added (``print`` from ``service.documents.commands``).
"""

from __future__ import annotations

import sys
from contextlib import contextmanager
from pathlib import Path
from typing import Callable, TypeVar

import click

from service import vocab

T = TypeVar("T")

__all__ = ["main"]


def _started(start: Callable[[], T], engine_of: Callable[[T], object]) -> T:
    """``start()`` with a bad setting as a one-line error, and the pooled connections closed when the command
    ends (a long-lived caller, such as a test runner invoking many commands, would otherwise leave them to the
    garbage collector)."""
    try:
        started = start()
    except ValueError as exc:  # a ConfigError, or a setting that does not parse
        raise click.ClickException(str(exc)) from None
    context = click.get_current_context(silent=True)
    if context is not None:
        context.call_on_close(engine_of(started).dispose)
    return started


def _app(*, routes: bool = False):
    """The application for a command; with its pages and API (``routes``) only for the one that serves them."""
    from service.app import create_app

    return _started(lambda: create_app(routes=routes), lambda app: app.extensions["dotledger.engine"])


class _Store:
    """What a command that only reads or writes the database needs: the configuration and sessions, without
    the web application (whose start costs the command line most of its time)."""

    def __init__(self, config: dict, engine) -> None:
        self.config, self.engine, self._sessions = config, engine, None

    @classmethod
    def start(cls) -> "_Store":
        from service.config import load_config
        from service.resources import default_instance_path
        from service.store.db import make_engine

        def start() -> "_Store":
            config = load_config(str(default_instance_path()))
            return cls(config, make_engine(config["DATABASE_URL"]))

        return _started(start, lambda store: store.engine)

    @property
    def sessions(self):
        """The session factory (the ORM, the audit hook and the monthly totals are loaded on first use)."""
        from service.store.db import make_sessionmaker

        if self._sessions is None:
            self._sessions = make_sessionmaker(self.engine)
        return self._sessions


def _catalogue(app):
    from service.appdata import catalogue

    return catalogue(app)


def _sessions(app):
    return app.extensions["dotledger.sessions"]


@contextmanager
def _command_session(app, command: str):
    """A transaction whose audit events name the command as their actor."""
    from service.store.db import session_scope

    with session_scope(_sessions(app)) as session:
        session.info["actor"] = {"user_id": None, "label": f"cli:{command}"}
        yield session


def _init(app) -> tuple[int, int]:
    from service.store import inventory
    from service.store.db import upgrade

    upgrade(app.config["DATABASE_URL"])
    with _command_session(app, "init") as session:
        return inventory.sync_catalogue(session, _catalogue(app))


@click.group()
@click.version_option(package_name="dotledger")
@click.pass_context
def main(context: click.Context) -> None:
    """dotledger: inventory, mass balance and waste records for nanocrystal labs.

    Suggestions only: classification and approval rest with local regulations and the
    site safety officer.
    """
    # Commands added from other layers (service.console wires `print` from service.documents)
    # start the application with this, as the commands here do, instead of importing it.
    context.obj = _app


@main.command()
@click.option("--site-name", help="The site's name, shown on every page and document (kept in the database).")
def init(site_name: str | None) -> None:
    """Create or upgrade the database and load the substance catalogue."""
    from service.errors import InvalidInput
    from service.store.site import UNNAMED, set_site_name
    from service.store.site import site_name as stored_site_name

    app = _app()
    added, updated = _init(app)
    with _command_session(app, "init") as session:
        if site_name is not None:
            try:
                set_site_name(session, site_name)
            except InvalidInput as exc:
                raise click.ClickException(str(exc)) from None
        name = stored_site_name(session)
    click.echo(f"database ready at {app.config['DATABASE_URL']}; catalogue: {added} substance(s) added, {updated} updated")
    click.echo(f"site: {name}" + (" (name it with: dotledger init --site-name NAME)" if name == UNNAMED else ""))


@main.command()
def demo() -> None:
    """Load the invented demonstration scenario (safe to run again)."""
    from service.store.demo import SITE_NAME, load_scenario
    from service.store.site import set_site_name

    app = _app()
    _init(app)
    with _command_session(app, "demo") as session:
        set_site_name(session, SITE_NAME, only_if_unnamed=True)
        added, passwords = load_scenario(session, _catalogue(app), app.extensions["dotledger.rules"],
                                         app.config["BALANCE_TOLERANCE"], app.config["BALANCE_ELEMENTS"])
    click.echo(f"demo scenario {SITE_NAME!r}: " + ", ".join(f"{n} {k} added" for k, n in added.items()))
    if passwords:
        click.echo("demo accounts (passwords are shown only now; note them):")
        for email, password in passwords.items():
            click.echo(f"  {email:<26} {password}")
    else:
        click.echo("demo accounts exist already; their passwords were shown when they were created")


@main.command()
@click.option("--host", default="127.0.0.1", show_default=True)
@click.option("--port", default=8000, show_default=True, type=int)
def serve(host: str, port: int) -> None:
    """Serve the web pages and the API."""
    from waitress import serve as waitress_serve

    app = _app(routes=True)
    click.echo(f"dotledger on http://{host}:{port}/ (database {app.config['DATABASE_URL']}); Ctrl-C stops")
    waitress_serve(app, host=host, port=port, threads=8)


@main.command("import-inventory")
@click.argument("file", type=click.Path(exists=True, dir_okay=False, path_type=Path))
@click.option("--dry-run", is_flag=True, help="Check every row and report, write nothing.")
@click.option("--only-valid", is_flag=True, help="Import the accepted rows even when others are rejected.")
@click.option("--report", "report_path", type=click.Path(dir_okay=False, path_type=Path),
              help="Also write the rejected rows to this CSV file.")
def import_inventory_command(file: Path, dry_run: bool, only_valid: bool, report_path: Path | None) -> None:
    """Import stocks from a CSV or XLSX spreadsheet; rejected rows are listed with the reason.

    Every row is written in one transaction, or none: a file with a rejected row imports nothing
    unless --only-valid asks for the accepted rows alone.
    """
    from service.errors import InvalidInput
    from service.store.importer import import_inventory, lookup_in, read_table

    app = _app()
    _init(app)
    try:
        frame = read_table(file)
    except InvalidInput as exc:
        raise click.ClickException(str(exc)) from None
    lookup = lookup_in(_catalogue(app))
    with _command_session(app, "import-inventory") as session:
        with click.progressbar(length=len(frame), label="checking rows", file=sys.stderr) as bar:
            report = import_inventory(session, frame, catalogue_lookup=lookup, dry_run=dry_run,
                                      only_valid=only_valid, progress=bar.update)
    for row in report.rejected:
        click.echo(f"line {row.line} ({row.label or 'no label'}): {row.reason}")
    if report_path is not None:
        report_path.write_bytes(report.to_csv_bytes())
    verb = "would import" if dry_run else "imported"
    click.echo(
        f"{report.rows} row(s) read: {verb} {report.imported}, rejected {len(report.rejected)}"
        + (f", {report.locations_created} new location(s)" if report.locations_created else "")
    )
    if report.withheld:
        raise click.ClickException(f"nothing imported: {len(report.rejected)} row(s) rejected; correct them, or "
                                   f"import the {report.accepted} accepted row(s) alone with --only-valid")


@main.command("add-user")
@click.argument("email")
@click.option("--name", "display_name", required=True, help="Name shown on records and documents.")
@click.option("--role", type=click.Choice(vocab.ROLES), required=True)
@click.option("--lab", "lab_codes", multiple=True, help="Lab code the user belongs to (repeatable).")
@click.password_option(help="At least 12 characters; asked for when not given.")
def add_user(email: str, display_name: str, role: str, lab_codes: tuple[str, ...], password: str) -> None:
    """Create an account (e.g. the first administrator of a new site)."""
    from pydantic import ValidationError
    from sqlalchemy import select

    from service.errors import Conflict, InvalidInput
    from service.schemas import UserIn
    from service.store import identity
    from service.store.models import Lab

    app = _app()
    _init(app)
    try:
        with _command_session(app, "add-user") as session:
            lab_ids = []
            for code in lab_codes:
                lab_id = session.scalar(select(Lab.id).where(Lab.code == code))
                if lab_id is None:
                    raise click.ClickException(f"no lab with code {code!r}")
                lab_ids.append(lab_id)
            user = identity.create_user(session, UserIn(email=email, display_name=display_name, role=role,
                                                        password=password, lab_ids=lab_ids))
            click.echo(f"created {user.email} ({user.role})")
    except ValidationError as exc:
        raise click.ClickException("; ".join(f"{'.'.join(map(str, e['loc']))}: {e['msg']}" for e in exc.errors()))
    except (Conflict, InvalidInput) as exc:
        raise click.ClickException(str(exc)) from None


@main.command("audit-verify")
@click.option("--expect", "expected_hash", metavar="HASH",
              help="A head hash kept outside the database (printed by backup, in PATH.head): fail unless the "
                   "intact chain still holds it.")
def audit_verify(expected_hash: str | None) -> None:
    """Recompute the audit trail's hash chain; name the first broken event (exit status 1)."""
    from service.store import audit_chain

    from sqlalchemy.exc import DBAPIError

    store = _Store.start()  # Core tables and one connection: no ORM, no web application
    try:
        with store.engine.connect() as connection:
            head = audit_chain.read_head(connection)
            report = audit_chain.verify_chain(connection)
            anchor = (audit_chain.find_hash(connection, expected_hash.strip().lower())
                      if report.ok and expected_hash else None)
    except DBAPIError as exc:  # no such table, no server, no rights
        raise click.ClickException(f"cannot read the audit trail of {store.config['DATABASE_URL']}: "
                                   f"{str(exc.orig).strip()} (a new database: run `dotledger init` first)") from None
    if not report.ok:
        click.echo(f"audit chain BROKEN at event {report.first_broken_id}: {report.reason} "
                   f"({report.events_checked} event(s) before it verified)", err=True)
        sys.exit(1)
    click.echo(f"audit chain intact: {report.events_checked} event(s); head hash {head.last_hash}")
    if expected_hash is None:
        click.echo("keep the head hash outside the database (e.g. in the lab notebook) to detect a rewritten tail")
    elif anchor is None:
        click.echo(f"audit chain does NOT hold the expected head hash {expected_hash}: the chain was rolled back or "
                   f"rewritten after that hash was recorded (its head is now {head.last_hash})", err=True)
        sys.exit(1)
    else:
        later = head.last_event_id - anchor
        click.echo(f"expected head hash found at event {anchor}"
                   + (" (the head)" if later == 0 else f"; {later} event(s) recorded after it"))


@main.command()
@click.argument("path", type=click.Path(dir_okay=False, path_type=Path))
@click.option("--force", is_flag=True, help="Replace PATH if it exists.")
def backup(path: Path, force: bool) -> None:
    """Write an online, consistent copy of the database to PATH and its audit head hash to PATH.head.

    SQLite: a copy through SQLite's backup API. PostgreSQL: a pg_dump archive (custom format) of the
    database's schema. The server may keep running.
    """
    from service.store.backup import BackupError, backup as run_backup, head_file

    store = _Store.start()
    try:
        done = run_backup(store.config["DATABASE_URL"], path, force=force)
    except BackupError as exc:
        raise click.ClickException(str(exc)) from None
    click.echo(f"backup written to {path}: audit head event {done.last_event_id}, hash {done.head_hash}")
    click.echo(f"head hash written to {head_file(path)}; check a copy with: dotledger audit-verify --expect "
               f"{done.head_hash}")


@main.command()
@click.argument("path", type=click.Path(exists=True, dir_okay=False, path_type=Path))
@click.option("--force", is_flag=True, help="Replace the contents of a database that is not empty.")
def restore(path: Path, force: bool) -> None:
    """Load the backup at PATH into the configured database (an empty one unless --force)."""
    from service.store.backup import BackupError, head_file, restore as run_restore

    store = _Store.start()
    store.engine.dispose()  # no pooled connection of ours holds the target open
    try:
        report = run_restore(path, store.config["DATABASE_URL"], force=force)
    except BackupError as exc:
        raise click.ClickException(str(exc)) from None
    if not report.ok:
        click.echo(f"restored, but the audit chain is BROKEN at event {report.first_broken_id}: {report.reason}",
                   err=True)
        sys.exit(1)
    click.echo(f"restored {path} into {store.config['DATABASE_URL']}; audit chain intact: "
               f"{report.events_checked} event(s)")
    kept = head_file(path)
    if kept.is_file():
        click.echo(f"check it against the head hash kept at the backup: dotledger audit-verify --expect "
                   f"{kept.read_text(encoding='ascii').strip()}")


@main.command()
@click.argument("procedure_id", type=int)
@click.option("--scale", "scales", default="2,5,10", show_default=True, help="Comma-separated scale factors.")
def preview(procedure_id: int, scales: str) -> None:
    """Evaluate a procedure at other scales and list the thresholds each would cross."""
    from pydantic import ValidationError

    from service.schemas import PreviewQuery
    from service.store import procedures
    from service.store.db import session_scope
    from service.store.models import Procedure

    try:
        factors = PreviewQuery.model_validate({"scales": scales}).scales
    except ValidationError as exc:
        raise click.BadParameter(exc.errors()[0]["msg"].removeprefix("Value error, "), param_hint="--scale")
    app = _app()
    with session_scope(_sessions(app), write=False) as session:
        proc = session.get(Procedure, procedure_id)
        if proc is None:
            raise click.ClickException(f"no procedure with id {procedure_id}")
        rows = procedures.preview(session, proc, app.extensions["dotledger.rules"], factors)
        click.echo(f"procedure {proc.id} rev {proc.revision} '{proc.title}' ({proc.state}, scale {proc.scale:g})")
        for scale, level, masses, findings in rows:
            metals = ", ".join(f"{s} {ug / 1000:,.1f} mg" for s, ug in masses.items() if s in app.config["BALANCE_ELEMENTS"])
            click.echo(f"\n× {scale:g}: highest finding {level or 'none'}; per batch {metals or 'no tracked metals'}")
            for f in findings:
                click.echo(f"  [{f.level}] {f.rule_id} ({f.pack}@{f.pack_version}): {f.message}")
    click.echo("\nSuggestions only: approval rests with the site safety officer and local regulations.")


def _report_frame(name: str, by: str | None, since, until, element: str | None):
    """The ledger report ``name`` from the configured database (read-only session)."""
    from service.store import ledger
    from service.store.db import session_scope

    if name == "elements":
        return _element_ledger_frame(by, since, until, element)
    keys = [part.strip() for part in by.split(",") if part.strip()] if by else None
    filters = {"element": element}
    if name == "waste":
        filters.update(since=since.date() if since else None, until=until.date() if until else None)
    elif since or until:
        raise click.UsageError("--since and --until apply to the waste report only")
    try:
        keys = ledger.REPORTS[name].check_by(keys)
    except ledger.UnknownGroupKey as exc:
        raise click.BadParameter(str(exc), param_hint="--by") from None
    store = _Store.start()
    with session_scope(store.sessions, write=False) as session:
        return ledger.run_report(session, name, keys, **filters)


def _element_ledger_frame(by: str | None, since, until, element: str | None):
    """The site element ledger of the months of ``since``..``until`` (µg columns)."""
    from service import vocab
    from service.present.element_ledger import ledger_frame
    from service.store import element_ledger
    from service.store.db import session_scope

    if by:
        raise click.UsageError("--by does not apply to the element ledger (one row per element and month)")
    if element is not None and element not in vocab.ELEMENT_SYMBOLS:
        raise click.BadParameter(f"{element!r} is not an element symbol", param_hint="--element")
    store = _Store.start()
    with session_scope(store.sessions, write=False) as session:
        lines = element_ledger.ledger_lines(
            session, since=since.strftime("%Y-%m") if since else None, until=until.strftime("%Y-%m") if until else None,
            element=element, tolerance=store.config["BALANCE_TOLERANCE"])
    return ledger_frame(lines)


_REPORT_OPTIONS = (
    click.argument("name", type=click.Choice(["waste", "inventory", "elements"])),
    click.option("--by", help="Comma-separated group keys (waste: element,stream,lab,container,month; "
                              "inventory: element,location,lab)."),
    click.option("--since", type=click.DateTime(["%Y-%m-%d"]),
                 help="Waste from this day (UTC), inclusive; elements: from this day's month."),
    click.option("--until", type=click.DateTime(["%Y-%m-%d"]),
                 help="Waste up to this day (UTC), inclusive; elements: to this day's month."),
    click.option("--element", help="Only this element (e.g. Cd)."),
)


def _report_options(command):
    for option in reversed(_REPORT_OPTIONS):
        command = option(command)
    return command


@main.command()
@_report_options
def report(name: str, by: str | None, since, until, element: str | None) -> None:
    """Print a ledger report (masses in mg): waste leaving, inventory on hand, or the site element ledger."""
    from service.present import element_ledger
    from service.store import ledger

    frame = _report_frame(name, by, since, until, element)
    if name == "elements":
        _echo_element_ledger(frame)
        click.echo(f"\n{element_ledger.CAUTION}")
        return
    CAUTION = ledger.CAUTION
    frame = frame.drop(columns="mass_ug")
    if frame.empty:
        click.echo("no records match")
    else:
        click.echo(frame.to_string(index=False, float_format=lambda mg: f"{mg:,.3f}"))
    click.echo(f"\n{CAUTION}")


def _echo_element_ledger(frame) -> None:
    """The ledger as a table in mg (exact: three decimals of whole µg), one block per element."""
    if frame.empty:
        click.echo("no records in these months")
        return
    shown = frame.drop(columns=["difference_ug", "tolerance_percent"]).copy()
    masses = [c for c in shown.columns if c.endswith("_ug")]
    for column in masses:
        shown[column] = shown[column].map(lambda ug: f"{ug / 1000:,.3f}")
    shown = shown.rename(columns={c: c.removesuffix("_ug") + " (mg)" for c in masses})
    shown["closes"] = frame.apply(lambda row: "yes" if row["closes"] else
                                  ("NO: records disagree by %d µg" % row["difference_ug"] if row["difference_ug"]
                                   else f"no: unaccounted beyond {row['tolerance_percent']:g} % of drawn"), axis=1)
    for element, block in shown.groupby("element", sort=True):
        click.echo(f"\n{element}")
        click.echo(block.drop(columns="element").to_string(index=False))


@main.command()
@_report_options
@click.option("--format", "fmt", type=click.Choice(["csv", "xlsx"]), default="csv", show_default=True)
@click.option("--output", required=True, type=click.Path(dir_okay=False, path_type=Path), help="File to write.")
def export(name: str, by: str | None, since, until, element: str | None, fmt: str, output: Path) -> None:
    """Write a ledger report to a CSV or XLSX file (masses in µg and mg; the element ledger in µg)."""
    from service.present import element_ledger
    from service.store.ledger import CAUTION, to_csv_bytes, to_xlsx_bytes

    caution = element_ledger.CAUTION if name == "elements" else CAUTION
    frame = _report_frame(name, by, since, until, element)
    output.write_bytes(to_csv_bytes(frame, caution=caution) if fmt == "csv"
                       else to_xlsx_bytes(frame, caution=caution, sheet=name))
    click.echo(f"wrote {len(frame)} row(s) of the {name} report to {output}")
    click.echo(caution)


@main.command()
@click.option("--core", type=click.Choice(["CdSe", "CdTe", "CdS"]), required=True)
@click.option("--wavelength", "wavelength_nm", type=float, required=True, help="First excitonic peak, nm.")
@click.option("--absorbance", type=float, required=True, help="Absorbance at the peak of the measured sample.")
@click.option("--path", "path_length_cm", type=float, default=1.0, show_default=True, help="Path length, cm.")
@click.option("--dilution", "dilution_factor", type=float, default=1.0, show_default=True,
              help="Dispersion volume over measured aliquot volume.")
@click.option("--volume", required=True, help='Volume of the undiluted dispersion, e.g. "4 mL".')
@click.option("--shell", type=click.Choice(["ZnS", "CdS"]), default=None)
@click.option("--monolayers", "shell_monolayers", type=float, default=0.0, show_default=True)
def estimate(**options) -> None:
    """Estimate the metal content of a nanocrystal dispersion from its absorbance."""
    from pydantic import ValidationError

    from service import estimates
    from service.chem.figures import concentration_text, percent_text
    from service.chem.units import QuantityError
    from service.nano import NanoError
    from service.schemas import EstimateIn

    try:
        result = estimates.as_dict(estimates.estimate(EstimateIn(**options)))
    except ValidationError as exc:
        raise click.ClickException("; ".join(f"{'.'.join(map(str, e['loc']))}: {e['msg']}" for e in exc.errors()))
    except (NanoError, QuantityError) as exc:
        raise click.ClickException(str(exc)) from None
    click.echo(f"{result['core']}{'/' + result['shell'] if result['shell'] else ''} at {result['wavelength_nm']:g} nm: "
               f"core diameter {result['core_diameter_nm']:.2f} nm, "
               f"ε {result['extinction_per_m_per_cm']:.3g} M⁻¹ cm⁻¹, "
               f"particles {concentration_text(result['particle_concentration_mol_per_l'], 'mol/L')}")
    for row in result["elements"]:
        click.echo(f"  {row['element']:<2} {row['mass_mg']:10.3f} mg  (± {percent_text(100 * row['relative_uncertainty'])})")
    click.echo(result["caution"])
