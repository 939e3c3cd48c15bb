"""The ``dotledger`` console script: the command line of ``service.cli`` with ``print`` added.

The root layer wires the top four together: ``service.cli`` and ``service.documents`` do not
import each other, so the documents' ``print`` group joins the command line here. It is loaded
when it is asked for (its imports are those of every document: a command that prints nothing
does not pay for them). ``service.cli.main`` itself stays as it is defined.
"""

from __future__ import annotations

import click

from service import cli

__all__ = ["main"]

_LATER = {"print": ("service.documents.commands", "print_group")}


class _Commands(click.Group):
    """A group whose commands named in ``_LATER`` are imported on first use."""

    def list_commands(self, ctx: click.Context) -> list[str]:
        return sorted({*super().list_commands(ctx), *_LATER})

    def get_command(self, ctx: click.Context, name: str):
        if name in _LATER and name not in self.commands:
            from importlib import import_module

            module, attribute = _LATER[name]
            self.add_command(getattr(import_module(module), attribute), name)
        return super().get_command(ctx, name)


main = _Commands(name=cli.main.name, commands=dict(cli.main.commands), callback=cli.main.callback,
                 params=list(cli.main.params), help=cli.main.help, context_settings=cli.main.context_settings)
