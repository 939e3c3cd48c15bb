"""The site's own data: its name, kept in the database with the records it heads."""

from __future__ import annotations

from sqlalchemy.orm import Session

from service.errors import InvalidInput
from service.store.models import Site

__all__ = ["UNNAMED", "NAME_MAX_LENGTH", "site_name", "set_site_name"]

# Shown until someone names the site (`dotledger init --site-name …`).
UNNAMED = "Unnamed site"
NAME_MAX_LENGTH = 200


def site_name(session: Session) -> str:
    """The site's name, or :data:`UNNAMED` while none is recorded."""
    site = session.get(Site, 1)
    return site.name if site is not None else UNNAMED


def set_site_name(session: Session, name: str, *, only_if_unnamed: bool = False) -> bool:
    """Record the site's name; with ``only_if_unnamed`` keep a name already recorded.

    Returns whether the stored name changed. Surrounding white space is dropped; an empty or
    over-long name raises :class:`InvalidInput` naming the field ``site_name``.
    """
    name = " ".join(name.split())
    if not name or len(name) > NAME_MAX_LENGTH:
        raise InvalidInput("site_name", f"must have 1 to {NAME_MAX_LENGTH} characters, has {len(name)}")
    site = session.get(Site, 1)
    if site is None:
        session.add(Site(id=1, name=name))
    elif only_if_unnamed or site.name == name:
        return False
    else:
        site.name = name
    session.flush()
    return True
