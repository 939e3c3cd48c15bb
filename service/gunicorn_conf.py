"""Settings for serving dotledger with several worker processes (gunicorn, the ``server`` extra).

    gunicorn -c python:service.gunicorn_conf -w 4 -b 127.0.0.1:8000

Before any worker starts, the master process checks the configuration for several processes
(``service.config.check_worker_processes``: PostgreSQL, ``DOTLEDGER_SECRET_KEY`` set) and stops
with one line naming the setting otherwise. Each worker then imports the application itself
(no preloading): its own engine and connection pool, its own copy of the rule packs and the
catalogue. What must agree between processes lives in the database: container totals and stock
amounts are changed under row locks, the audit chain's head is a locked row, sign-in failures and
idempotency keys are rows.
"""

from __future__ import annotations

from service.config import ConfigError, load_config
from service.resources import default_instance_path

wsgi_app = "service.app:create_app()"
# The application is made in each worker after the fork: an engine made before it would hand the
# same pooled connections to several processes.
preload_app = False
# A worker that does not answer within this many seconds is restarted (a large PDF renders in a few).
timeout = 120


def on_starting(server) -> None:
    """gunicorn hook, in the master before the workers start: refuse settings several processes cannot share."""
    try:
        load_config(str(default_instance_path()), workers=server.cfg.workers)
    except (ConfigError, ValueError) as exc:
        # gunicorn prints a RuntimeError from the master as one "Error: …" line and exits with status 1.
        raise RuntimeError(f"dotledger: {exc}") from None
