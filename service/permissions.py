"""The role-permission matrix: which roles may call which route (by Flask endpoint name).

One table for the whole service. A route that is neither public nor in the matrix is
refused for everyone (fail closed), and tests/test_permissions.py walks every route ×
role against this table, so a new route without a rule fails the test.
"""

from __future__ import annotations

from service import vocab

__all__ = ["ROLES", "PUBLIC", "MATRIX", "LAB_SCOPED_ROLES", "allowed"]

ROLES = vocab.ROLES
EVERYONE = frozenset(ROLES)

# Reachable without signing in.
PUBLIC = frozenset({"static", "api.index", "api.openapi", "api.issue_token", "web.login", "web.login_submit"})

# Roles that see and change only the records of their own labs.
LAB_SCOPED_ROLES = frozenset({"researcher"})

# Who may change each inventory resource (everyone may read; the auditor never writes).
_INVENTORY_WRITERS = {
    "labs": {"lab_manager", "admin"},
    "locations": {"lab_manager", "safety_officer", "admin"},
    "substances": {"lab_manager", "safety_officer", "admin"},
    "stocks": {"researcher", "lab_manager", "admin"},
    "mixtures": {"researcher", "lab_manager", "admin"},
}

MATRIX: dict[str, frozenset[str]] = {
    # account and tokens
    "api.me": EVERYONE,
    "api.list_tokens": EVERYONE,
    "api.revoke_token": EVERYONE,
    "web.logout": EVERYONE,
    "web.account": EVERYONE,
    "web.account_token_create": EVERYONE,  # the password is asked again
    "web.account_token_revoke": EVERYONE,  # one's own tokens only (the store checks)
    # users: administrators only
    "api.list_users": frozenset({"admin"}),
    "api.create_users": frozenset({"admin"}),
    "api.read_users": frozenset({"admin"}),
    "api.update_users": frozenset({"admin"}),
    "api.retire_users": frozenset({"admin"}),
    # audit trail
    "api.list_audit_events": frozenset({"auditor", "admin"}),
    # procedures: researchers register and submit; safety officers decide
    "api.list_procedures": EVERYONE,
    "api.read_procedures": EVERYONE,
    "api.list_procedure_revisions": EVERYONE,
    "api.list_procedure_decisions": EVERYONE,
    "api.preview_procedure": EVERYONE,
    "api.create_procedures": frozenset({"researcher", "lab_manager", "admin"}),
    "api.update_procedures": frozenset({"researcher", "lab_manager", "admin"}),
    "api.submit_procedure": frozenset({"researcher", "lab_manager", "admin"}),
    "api.withdraw_procedure": frozenset({"researcher", "lab_manager", "admin"}),  # researchers: their own only
    "api.approve_procedure": frozenset({"safety_officer"}),
    "api.request_changes_procedure": frozenset({"safety_officer"}),
    "api.decline_procedure": frozenset({"safety_officer"}),
    "api.retire_procedure": frozenset({"safety_officer", "lab_manager", "admin"}),
    "api.review_queue": frozenset({"safety_officer", "auditor", "admin"}),
    # ledger reports (waste leaving, inventory on hand): read-only, everyone; researchers lab-scoped
    "api.report_waste": EVERYONE,
    "api.report_inventory": EVERYONE,
    # the site element ledger is site-wide: not for lab-scoped roles
    "api.report_elements": frozenset({"safety_officer", "lab_manager", "auditor", "admin"}),
    "api.report_element_figure": frozenset({"safety_officer", "lab_manager", "auditor", "admin"}),
    # the generator category is the whole site's: not for lab-scoped roles, whose figures are their labs'
    "api.report_generator_category": frozenset({"safety_officer", "lab_manager", "auditor", "admin"}),
    # accumulation areas: read-only views of their containers' sums; researchers see their labs' and shared areas
    "api.list_accumulation_areas": EVERYONE,
    "api.read_accumulation_areas": EVERYONE,
    # runs: researchers record their batches
    "api.list_runs": EVERYONE,
    "api.read_runs": EVERYONE,
    "api.read_run_balance": EVERYONE,
    "api.create_runs": frozenset({"researcher", "lab_manager", "admin"}),
    "api.add_run_output": frozenset({"researcher", "lab_manager", "admin"}),
    "api.add_run_loss": frozenset({"researcher", "lab_manager", "admin"}),
    "api.stock_run_output": frozenset({"researcher", "lab_manager", "admin"}),
    "api.close_run": frozenset({"researcher", "lab_manager", "admin"}),
    "api.create_estimate": EVERYONE,  # a calculation; nothing is stored
    # stocks leaving the inventory: who keeps the stocks moves them (researchers: their labs' stocks, into
    # their labs); everyone reads the movements (researchers: of their labs)
    "api.dispose_stock": frozenset({"researcher", "lab_manager", "admin"}),
    "api.transfer_stock": frozenset({"researcher", "lab_manager", "admin"}),
    "api.ship_stock": frozenset({"researcher", "lab_manager", "admin"}),
    "api.list_stock_movements_of_stock": EVERYONE,
    "api.list_stock_movements": EVERYONE,
    # a spreadsheet names its labs by code, over any lab: the inventory's keepers, not lab-scoped roles
    "api.import_stocks": frozenset({"lab_manager", "admin"}),
    # waste containers: researchers add entries; the safety officer and lab manager run the containers
    "api.list_waste_containers": EVERYONE,
    "api.read_waste_containers": EVERYONE,
    "api.list_waste_entries": EVERYONE,
    "api.create_waste_containers": frozenset({"safety_officer", "lab_manager", "admin"}),
    "api.add_waste_entry": frozenset({"researcher", "lab_manager", "safety_officer", "admin"}),
    "api.reverse_waste_entry": frozenset({"researcher", "lab_manager", "safety_officer", "admin"}),
    "api.mark_full_waste_container": frozenset({"researcher", "lab_manager", "safety_officer", "admin"}),
    "api.request_pickup_waste_container": frozenset({"lab_manager", "safety_officer", "admin"}),
    "api.collect_waste_container": frozenset({"safety_officer", "admin"}),
    # the waste determination (confirmed codes) is the safety officer's; the admin may record one
    "api.determine_waste_container": frozenset({"safety_officer", "admin"}),
    # printed documents (risk assessment, waste manifest): read-only, everyone; researchers lab-scoped
    "documents.procedure_assessment_pdf": EVERYONE,
    "documents.procedure_assessment_html": EVERYONE,
    "documents.waste_container_manifest_pdf": EVERYONE,
    "documents.waste_container_manifest_html": EVERYONE,
    "documents_pages.procedure_assessment_pdf": EVERYONE,
    "documents_pages.waste_container_manifest_pdf": EVERYONE,
    # a container's label: whoever may read the container prints it (researchers: their labs' containers)
    "documents.waste_container_label_pdf": EVERYONE,
    "documents_pages.waste_container_label_pdf": EVERYONE,
    # pages
    "web.overview": EVERYONE,
    "web.stocks": EVERYONE,
    "web.mixtures": EVERYONE,
    "web.procedures": EVERYONE,
    "web.procedure": EVERYONE,
    "web.procedure_new": frozenset({"researcher", "lab_manager", "admin"}),  # as api.create_procedures
    "web.procedure_create": frozenset({"researcher", "lab_manager", "admin"}),
    "web.procedure_edit": frozenset({"researcher", "lab_manager", "admin"}),  # as api.update_procedures
    "web.procedure_save": frozenset({"researcher", "lab_manager", "admin"}),
    "web.procedure_check": frozenset({"researcher", "lab_manager", "admin"}),
    "web.review": frozenset({"safety_officer", "auditor", "admin"}),  # as api.review_queue
    "web.review_procedure": frozenset({"safety_officer"}),  # the page the decisions are taken on
    # Every role reaches the workflow form's route; the view checks the action's API endpoint
    # (api.<action>_procedure above), so a page lets a role do exactly what the API lets it do.
    "web.procedure_act": EVERYONE,
    "web.waste": EVERYONE,
    "web.container": EVERYONE,
    "web.areas": EVERYONE,  # as api.list_accumulation_areas
    "web.area": EVERYONE,
    # waste entries from the pages: as api.add_waste_entry / api.reverse_waste_entry
    "web.waste_entry_choose": frozenset({"researcher", "lab_manager", "safety_officer", "admin"}),
    "web.waste_entry": frozenset({"researcher", "lab_manager", "safety_officer", "admin"}),
    "web.waste_entry_submit": frozenset({"researcher", "lab_manager", "safety_officer", "admin"}),
    "web.waste_entry_reverse": frozenset({"researcher", "lab_manager", "safety_officer", "admin"}),
    # The container's state buttons: the roles that may take some move reach the route; the view checks
    # the move's API endpoint (api.<action>_waste_container above).
    "web.container_move": frozenset({"researcher", "lab_manager", "safety_officer", "admin"}),
    "web.container_determination": frozenset({"safety_officer", "admin"}),  # as api.determine_waste_container
    "web.container_determine": frozenset({"safety_officer", "admin"}),
    "web.run": EVERYONE,
    "web.runs": EVERYONE,
    # run forms: as the API's run routes (api.create_runs, add_run_output, add_run_loss, stock_run_output, close_run)
    "web.run_new": frozenset({"researcher", "lab_manager", "admin"}),
    "web.run_start": frozenset({"researcher", "lab_manager", "admin"}),
    "web.run_output_new": frozenset({"researcher", "lab_manager", "admin"}),
    "web.run_output_add": frozenset({"researcher", "lab_manager", "admin"}),
    "web.run_loss_new": frozenset({"researcher", "lab_manager", "admin"}),
    "web.run_loss_add": frozenset({"researcher", "lab_manager", "admin"}),
    "web.run_stock_new": frozenset({"researcher", "lab_manager", "admin"}),
    "web.run_stock_add": frozenset({"researcher", "lab_manager", "admin"}),
    "web.run_close": frozenset({"researcher", "lab_manager", "admin"}),
    # inventory pages: the same roles as the API routes they stand for
    "web.stock": EVERYONE,  # as api.read_stocks
    "web.stock_new": frozenset(_INVENTORY_WRITERS["stocks"]),  # as api.create_stocks
    "web.stock_create": frozenset(_INVENTORY_WRITERS["stocks"]),
    "web.stock_edit": frozenset(_INVENTORY_WRITERS["stocks"]),  # as api.update_stocks
    "web.stock_save": frozenset(_INVENTORY_WRITERS["stocks"]),
    "web.mixture_new": frozenset(_INVENTORY_WRITERS["mixtures"]),  # as api.create_mixtures
    "web.mixture_create": frozenset(_INVENTORY_WRITERS["mixtures"]),
    "web.stock_move": frozenset({"researcher", "lab_manager", "admin"}),  # as api.dispose/transfer/ship_stock
    "web.stock_move_submit": frozenset({"researcher", "lab_manager", "admin"}),
    "web.stock_import": frozenset({"lab_manager", "admin"}),  # as api.import_stocks
    "web.stock_import_check": frozenset({"lab_manager", "admin"}),
    "web.stock_import_run": frozenset({"lab_manager", "admin"}),
    # the ledger page is site-wide, as api.report_elements and api.report_generator_category
    "web.ledger": frozenset({"safety_officer", "lab_manager", "auditor", "admin"}),
    "web.ledger_figure": frozenset({"safety_officer", "lab_manager", "auditor", "admin"}),  # as api.report_element_figure
    "web.ledger_download": frozenset({"safety_officer", "lab_manager", "auditor", "admin"}),
    "web.audit": frozenset({"auditor", "admin"}),  # as api.list_audit_events
    "web.audit_verify": frozenset({"auditor", "admin"}),  # reads only: recomputes the chain
}
for _name, _writers in _INVENTORY_WRITERS.items():
    MATRIX[f"api.list_{_name}"] = EVERYONE
    MATRIX[f"api.read_{_name}"] = EVERYONE
    for _verb in ("create", "update", "retire"):
        MATRIX[f"api.{_verb}_{_name}"] = frozenset(_writers)


def allowed(endpoint: str, role: str) -> bool:
    """Whether ``role`` may call ``endpoint`` (public endpoints are allowed for all)."""
    return endpoint in PUBLIC or role in MATRIX.get(endpoint, frozenset())
