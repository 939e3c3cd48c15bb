"""``dotledger print``: a risk-assessment sheet or a waste manifest written to a PDF file.

The group is added to the command line by ``service.console``; its commands start the
application with the starter the command line passes down as the click context's object
(``service.cli.main`` sets it), so this module imports neither the command line nor the root.
"""

from __future__ import annotations

from pathlib import Path
from typing import Callable

import click

__all__ = ["print_group"]


@click.group(name="print")
def print_group() -> None:
    """Write a printed document (PDF): a risk assessment or a waste manifest."""


def _print_document(start_app: Callable, kind: str, ident: int, output: Path | None, *options) -> None:
    from service.documents.sources import assessment_for, manifest_for
    from service.store import inventory
    from service.store.db import get_session
    from service.store.models import Procedure, WasteContainer

    app = start_app()
    model, build = (Procedure, assessment_for) if kind == "assessment" else (WasteContainer, manifest_for)
    with app.test_request_context():  # the session ends with the context, before rendering
        try:
            draft = build(inventory.get(get_session(), model, ident), *options)
        except LookupError as exc:
            raise click.ClickException(str(exc)) from None
    doc = draft.render()
    pdf = doc.pdf()
    target = output or Path(f"{doc.filename}.pdf")
    target.write_bytes(pdf)
    click.echo(str(target))
    click.echo(f"SHA-256 {doc.sha256}")


@print_group.command(name="assessment")
@click.argument("ident", type=int)
@click.option("--output", type=click.Path(dir_okay=False, path_type=Path), help="PDF file to write.")
@click.pass_obj
def print_assessment(start_app: Callable, ident: int, output: Path | None) -> None:
    """Write the risk-assessment sheet of procedure IDENT as PDF; print the path and the data SHA-256."""
    _print_document(start_app, "assessment", ident, output)


@print_group.command(name="manifest")
@click.argument("ident", type=int)
@click.option("--output", type=click.Path(dir_okay=False, path_type=Path), help="PDF file to write.")
@click.option("--transporter", help="The transporter's name (at most 200 characters).")
@click.option("--receiving-facility", help="The receiving facility's name and address (at most 300 characters).")
@click.option("--container-count", type=int, help="How many containers are shipped (1 to 999).")
@click.option("--container-type", help='The containers\' type, e.g. "20 L HDPE jerrican" (at most 80 characters).')
@click.pass_obj
def print_manifest(start_app: Callable, ident: int, output: Path | None, **shipment) -> None:
    """Write the waste manifest of container IDENT as PDF; print the path and the data SHA-256.

    Shipment details left out print as lines to fill by hand.
    """
    from pydantic import ValidationError

    from service.schemas import ManifestQuery

    try:
        query = ManifestQuery.model_validate({k: v for k, v in shipment.items() if v is not None})
    except ValidationError as exc:
        first = exc.errors()[0]
        raise click.BadParameter(first["msg"], param_hint=f"--{str(first['loc'][0]).replace('_', '-')}") from None
    _print_document(start_app, "manifest", ident, output, query)
