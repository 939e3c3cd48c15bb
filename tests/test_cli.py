"""The command line: init, demo (idempotent), and the pages serving the demo."""

from __future__ import annotations

import re
from decimal import Decimal

from click.testing import CliRunner

from service.app import create_app
from service.cli import main

# Cd on hand in the demo, by hand from the CIAAW 2021 standard atomic weights (Cd 112.414, O 15.999,
# C 12.011, H 1.008; g/mol):
CD, O, C, H = Decimal("112.414"), Decimal("15.999"), Decimal("12.011"), Decimal("1.008")
# NG-0001, 25 g CdO at 99.99 %: Cd mass fraction 112.414 / (112.414 + 15.999) = 0.87541; 25 g hold
# 21.883 g Cd, less the 25.7 mg CdO the demo's closed CdSe run drew (22.496 mg Cd): 21.8606 g.
CDO_STOCK_G = (Decimal("25") - Decimal("0.0257")) * Decimal("0.9999") * CD / (CD + O)
# NG-0002, 10 g Cd(CH3COO)2·2H2O = CdC4H10O6 (266.532 g/mol) at 98 %: × 0.42177 = 4.1333 g Cd.
ACETATE_STOCK_G = Decimal("10") * Decimal("0.98") * CD / (CD + 4 * C + 10 * H + 6 * O)
# NG-M01, cadmium oleate, is prepared from 1.2841 g of NG-0001: its Cd moved out of the stock, so it adds nothing.
# NG-P01, the run's product kept as a stock: the demo records 70 % of the run's Cd input as measured in it,
# 70 % of 22 496 µg rounded down = 15 747 µg (the product stock holds the output's masses, not a formula's).
CD_IN_UG = (Decimal("0.0257") * Decimal("0.9999") * CD / (CD + O) * 1_000_000).quantize(Decimal(1))
PRODUCT_STOCK_G = (CD_IN_UG * 70 // 100) / 1_000_000
DEMO_CD_ON_HAND_G = CDO_STOCK_G + ACETATE_STOCK_G + PRODUCT_STOCK_G  # 26.010 g


def test_init_then_demo_twice(sqlite_url, monkeypatch):
    monkeypatch.setenv("DOTLEDGER_DATABASE_URL", sqlite_url)
    runner = CliRunner()
    first = runner.invoke(main, ["init"])
    assert first.exit_code == 0, first.output
    assert "substance(s) added" in first.output
    demo = runner.invoke(main, ["demo"])
    assert demo.exit_code == 0, demo.output
    assert "1 labs added, 4 locations added, 16 stocks added, 3 mixtures added, 4 accounts added, 3 procedures added, 4 waste containers added, 1 product stocks added" in demo.output
    passwords = dict(line.split() for line in demo.output.splitlines() if line.startswith("  ") and "@" in line)
    assert set(passwords) == {"researcher@example.org", "safety@example.org", "manager@example.org", "admin@example.org"}
    again = runner.invoke(main, ["demo"])
    assert "0 labs added, 0 locations added, 0 stocks added, 0 mixtures added, 0 accounts added, 0 procedures added, 0 waste containers added, 0 product stocks added" in again.output
    assert not any(p in again.output for p in passwords.values())

    client = create_app({"DATABASE_URL": sqlite_url}).test_client()
    assert client.get("/").status_code == 302  # pages need a signed-in user
    sign_in(client, "manager@example.org", passwords["manager@example.org"])
    overview = client.get("/").get_data(as_text=True)
    assert "Colloidal Nanocrystal Group" in overview
    assert "local regulations" in overview and "site safety officer" in overview
    cd_row = re.search(r">Cd<.*?</tr>", overview, re.S)
    assert cd_row is not None
    assert (CD_IN_UG, f"{DEMO_CD_ON_HAND_G:.3f}") == (22_496, "26.010")
    assert "26.010" in cd_row.group(0)  # g of Cd on hand, to 3 decimals
    stocks = client.get("/stocks?element=Cd").get_data(as_text=True)
    assert "NG-0001" in stocks and "NG-0003" not in stocks  # selenium has no Cd
    assert client.get("/mixtures").status_code == 200


def sign_in(client, email: str, password: str) -> None:
    page = client.get("/login").get_data(as_text=True)
    token = page.split('name="csrf_token" value="', 1)[1].split('"', 1)[0]
    response = client.post("/login", data={"email": email, "password": password, "csrf_token": token, "next": "/"})
    assert response.status_code == 302, response.get_data(as_text=True)


def test_html_errors_for_pages(sqlite_url, monkeypatch):
    monkeypatch.setenv("DOTLEDGER_DATABASE_URL", sqlite_url)
    result = CliRunner().invoke(main, ["demo"])
    passwords = dict(line.split() for line in result.output.splitlines() if line.startswith("  ") and "@" in line)
    client = create_app({"DATABASE_URL": sqlite_url}).test_client()
    sign_in(client, "researcher@example.org", passwords["researcher@example.org"])
    missing = client.get("/no-such-page")
    assert missing.status_code == 404 and "text/html" in missing.content_type
    bad = client.get("/stocks?element=Qq")
    page = bad.get_data(as_text=True)
    assert bad.status_code == 422 and "query parameters do not validate" in page and "not an element symbol" in page


def test_import_of_a_missing_file_is_a_clear_error(tmp_path):
    result = CliRunner().invoke(main, ["import-inventory", str(tmp_path / "nope.csv")])
    assert result.exit_code == 2 and "does not exist" in result.output


def test_the_console_script_lists_every_command():
    # The installed `dotledger` is pyproject's console script; its commands are those DEVELOPERS.md
    # "Layout" lists, `print` among them although service.documents, not service.cli, defines it.
    from importlib.metadata import entry_points

    (script,) = entry_points(group="console_scripts", name="dotledger")
    result = CliRunner().invoke(script.load(), ["--help"])
    assert result.exit_code == 0, result.output
    listed = set(re.findall(r"^  ([a-z][a-z-]*) ", result.output.split("Commands:")[1], re.M))
    assert listed == {"init", "demo", "serve", "import-inventory", "add-user", "audit-verify", "preview",
                      "report", "export", "estimate", "print", "backup", "restore"}


def test_a_command_imports_what_it_uses(sqlite_url, monkeypatch):
    # audit-verify reads two Core tables on one connection: it starts without the web application, the
    # ORM, the documents' PDF engine, the unit registry or pandas (what made every command slow to start).
    # print still prints: its group is loaded when asked for.
    import subprocess
    import sys

    monkeypatch.setenv("DOTLEDGER_DATABASE_URL", sqlite_url)
    assert CliRunner().invoke(main, ["init"]).exit_code == 0
    probe = ("import sys\nfrom service.console import main\n"
             "try:\n    main(['audit-verify'])\nexcept SystemExit as exc:\n    assert exc.code in (0, None), exc.code\n"
             "print(sorted(m for m in ('flask', 'sqlalchemy.orm', 'weasyprint', 'pint', 'pandas', 'service.documents.sources')"
             " if m in sys.modules))\n")
    done = subprocess.run([sys.executable, "-c", probe], capture_output=True, text=True, timeout=120)
    assert done.returncode == 0, done.stderr
    assert "audit chain intact: " in done.stdout
    assert done.stdout.strip().splitlines()[-1] == "[]"
    listed = subprocess.run([sys.executable, "-c", "from service.console import main; main(['print', '--help'])"],
                            capture_output=True, text=True, timeout=120)
    assert "assessment" in listed.stdout and "manifest" in listed.stdout and "label" in listed.stdout


def test_audit_verify_of_a_database_never_initialised_says_so(sqlite_url, monkeypatch):
    monkeypatch.setenv("DOTLEDGER_DATABASE_URL", sqlite_url)
    result = CliRunner().invoke(main, ["audit-verify"])
    assert result.exit_code == 1
    assert "cannot read the audit trail" in result.output and "dotledger init" in result.output
    assert "Traceback" not in result.output
