"""Loading the YAML data files in ``rules/`` into pydantic models.

Every error names the file and the key path of the bad value (``substances[3].cas``),
so that whoever edits a file can find the line to fix.
"""

from __future__ import annotations

from pathlib import Path
from typing import TypeVar

import yaml
from pydantic import BaseModel, ValidationError

__all__ = ["DataFileError", "load_data_file", "key_path"]

M = TypeVar("M", bound=BaseModel)

# libyaml's parser where PyYAML was built with it (several times faster on the rule packs), else the
# pure-Python one; both are "safe" (plain data only) and both report a syntax error with its line.
YAML_LOADER = getattr(yaml, "CSafeLoader", yaml.SafeLoader)


class DataFileError(ValueError):
    """A data file that cannot be used; carries the file, the key path and the reason."""

    def __init__(self, path: Path | str, problems: list[tuple[str, str]]) -> None:
        self.path = str(path)
        self.problems = problems
        lines = [f"{self.path}: {where or '(top level)'}: {why}" for where, why in problems]
        super().__init__("\n".join(lines))


def key_path(loc: tuple[str | int, ...], document: object | None = None) -> str:
    """Render a pydantic error location as ``a.b[2].c``.

    With the parsed document, list indexes also show the entry's ``key``/``id`` where it
    has one (``substances[3 cadmium-oxide].cas``).
    """
    out = ""
    node = document
    for part in loc:
        if isinstance(part, int):
            label = str(part)
            if isinstance(node, list) and 0 <= part < len(node):
                node = node[part]
                if isinstance(node, dict):
                    name = node.get("key") or node.get("id")
                    if name:
                        label = f"{part} {name}"
            else:
                node = None
            out += f"[{label}]"
        else:
            node = node.get(part) if isinstance(node, dict) else None
            out += f".{part}" if out else str(part)
    return out


def load_data_file(path: Path | str, model: type[M]) -> M:
    """Read the YAML file at ``path`` and validate it as ``model``.

    Raises :class:`DataFileError` for unreadable YAML or invalid content.
    """
    path = Path(path)
    try:
        document = yaml.load(path.read_text(encoding="utf-8"), Loader=YAML_LOADER)
    except OSError as exc:
        raise DataFileError(path, [("", f"cannot read: {exc.strerror}")]) from None
    except yaml.YAMLError as exc:
        mark = getattr(exc, "problem_mark", None)
        where = f"line {mark.line + 1}" if mark else ""
        raise DataFileError(path, [(where, f"not valid YAML: {getattr(exc, 'problem', exc)}")]) from None
    try:
        return model.model_validate(document if document is not None else {})
    except ValidationError as exc:
        problems = [(key_path(err["loc"], document), err["msg"]) for err in exc.errors()]
        raise DataFileError(path, problems) from None
