"""Presentation: records turned into what people see.

One dict per record, the same for the JSON API, the page templates and the printed
documents, so every way in shows the same numbers:

- ``serialize`` — inventory records (labs, locations, substances, stocks, mixtures), element
  rows and findings;
- ``procedures``, ``runs``, ``waste`` — a procedure with its findings, a run with its mass
  balance, a waste container with its contents and findings, a waste entry.

Findings are evaluated once per record per request (:mod:`service.store.findings`); container
numbers come from the same pure Decimal calculation the container rules judge
(:mod:`service.rules.container_measures`). This layer reads the store and the loaded rule
packs (:mod:`service.appdata`); it imports none of api, web, documents or the CLI.
"""
