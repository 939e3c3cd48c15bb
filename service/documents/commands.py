"""``dotledger print``: a risk-assessment sheet, a waste manifest or a container label written to a PDF file.

The group is added to the command line by ``service.console``; its commands start the
application with the starter the command line passes down as the click context's object
(``service.cli.main`` sets it), so this module imports neither the command line nor the root.
"""

from __future__ import annotations

import gc
from contextlib import contextmanager
from pathlib import Path
from typing import Callable, Iterator

import click

__all__ = ["print_group"]


@contextmanager
def _no_collection() -> Iterator[None]:
    """The cyclic garbage collector paused while the command starts: loading the modules, the rule packs and
    the catalogue makes many objects that live to the end and little garbage, and each collection would walk
    them all again (about a quarter of a second here). Reference counting frees memory as usual meanwhile.
    What the start made is then frozen out of later collections (``gc.freeze``): otherwise the first one
    after the pause walks it all (about 0.13 s here)."""
    enabled = gc.isenabled()
    gc.disable()
    try:
        yield
    finally:
        gc.freeze()
        if enabled:
            gc.enable()


@click.group(name="print")
def print_group() -> None:
    """Write a printed document (PDF): a risk assessment, a waste manifest or a container label."""


def _print_document(start_app: Callable, kind: str, ident: int, output: Path | None, *options) -> None:
    from service.documents.render import PdfWorker

    with PdfWorker() as worker:  # WeasyPrint starts in a child while the data are gathered here
        with _no_collection():
            from service.documents.sources import assessment_for, label_for, manifest_for
            from service.store import inventory
            from service.store.db import get_session
            from service.store.models import Procedure, WasteContainer

            app = start_app()
            model, build = {"assessment": (Procedure, assessment_for), "manifest": (WasteContainer, manifest_for),
                            "label": (WasteContainer, label_for)}[kind]
            with app.test_request_context():  # the session ends with the context, before rendering
                try:
                    draft = build(inventory.get(get_session(), model, ident), *options)
                except LookupError as exc:
                    raise click.ClickException(str(exc)) from None
            doc = draft.render()
        pdf = worker.pdf(doc.html)
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
        raise _first_error(exc) from None
    _print_document(start_app, "manifest", ident, output, query)


def _first_error(exc, prefix: str = "--") -> click.BadParameter:
    first = exc.errors()[0]
    return click.BadParameter(first["msg"], param_hint=f"{prefix}{str(first['loc'][0]).replace('_', '-')}")


@print_group.command(name="label")
@click.argument("ident", type=int)
@click.option("--size", default="single-100x150", show_default=True,
              help="single-100x150 (one 100 mm × 150 mm label), a4-2x4 (A4 sheet of 2 × 4 labels of 99.1 mm × "
                   "67.7 mm) or letter-2x3 (US Letter sheet of 2 × 3 labels of 4 in × 3 1/3 in).")
@click.option("--output", type=click.Path(dir_okay=False, path_type=Path), help="PDF file to write.")
@click.option("--base-url", help="The address people reach the server at, e.g. https://lab.example.org, for the "
                                 "QR code (default: the PUBLIC_URL setting).")
@click.pass_obj
def print_label(start_app: Callable, ident: int, size: str, output: Path | None, base_url: str | None) -> None:
    """Write the label of waste container IDENT as PDF; print the path and the data SHA-256.

    The QR code opens the container's entry page under --base-url (or DOTLEDGER_PUBLIC_URL).
    """
    from pydantic import ValidationError

    from service.config import check_public_url
    from service.schemas import LabelQuery

    try:
        query = LabelQuery.model_validate({"size": size})
    except ValidationError as exc:
        raise _first_error(exc) from None
    try:
        base_url = check_public_url(base_url) if base_url else None
    except ValueError as exc:
        raise click.BadParameter(str(exc), param_hint="--base-url") from None

    def starter():
        app = start_app()
        if base_url:
            app.config["PUBLIC_URL"] = base_url
        if not app.config.get("PUBLIC_URL"):
            raise click.UsageError("the label's QR code needs the server's address: give --base-url "
                                   "(e.g. https://lab.example.org) or set DOTLEDGER_PUBLIC_URL")
        return app

    _print_document(starter, "label", ident, output, query)
