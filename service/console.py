"""The ``dotledger`` console script: the command line of ``service.cli`` with ``print`` added.

The root layer wires the top four together: ``service.cli`` and ``service.documents`` do not
import each other, so the documents' ``print`` group joins the command line here. The group is
a copy with its own table of commands, so ``service.cli.main`` itself stays as it is defined.
"""

from __future__ import annotations

import copy

from service import cli
from service.documents.commands import print_group

__all__ = ["main"]

main = copy.copy(cli.main)
main.commands = dict(cli.main.commands)
main.add_command(print_group)
