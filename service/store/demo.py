"""The invented demonstration scenario: one institute, one lab, a stocked inventory.

Idempotent: records are looked up by their unique labels and created only if missing.
"""

from __future__ import annotations

import secrets
from decimal import Decimal

from sqlalchemy import select
from sqlalchemy.orm import Session

from service.chem.substances import SubstanceCatalogue
from service.schemas import ComponentIn, LabIn, LocationIn, MixtureIn, StockIn, UserIn
from service.store import identity, inventory
from service.store.models import Lab, Location, Mixture, Stock, Substance, User

__all__ = ["SITE_NAME", "load_demo", "load_scenario"]

SITE_NAME = "Northgate Institute of Materials"
LAB = LabIn(code="C-214", name="Colloidal Nanocrystal Group", building="C")
LOCATIONS = {
    "toxics": ("C", "C-214", "toxics cabinet T1 (Cd, Se, Pb compounds)", "storage"),
    "flammables": ("C", "C-214", "flammables cabinet F1", "storage"),
    "glovebox": ("C", "C-214", "argon glovebox GB1", "storage"),
    "saa": ("C", "C-214", "fume hood H2 — satellite accumulation area", "satellite_accumulation_area"),
}
# label, catalogue name, amount, purity %, location
STOCKS = [
    ("NG-0001", "cadmium oxide", "25 g", 99.99, "toxics"),
    ("NG-0002", "cadmium acetate dihydrate", "10 g", 98.0, "toxics"),
    ("NG-0003", "selenium", "50 g", 99.99, "toxics"),
    ("NG-0004", "tellurium", "10 g", 99.997, "toxics"),
    ("NG-0005", "sulfur", "100 g", 99.98, "toxics"),
    ("NG-0006", "zinc acetate dihydrate", "25 g", 99.99, "toxics"),
    ("NG-0007", "lead(II) bromide", "10 g", 99.999, "toxics"),
    ("NG-0008", "cesium carbonate", "5 g", 99.9, "toxics"),
    ("NG-0009", "trioctylphosphine", "100 mL", 97.0, "glovebox"),
    ("NG-0010", "1-octadecene", "1 L", 90.0, "flammables"),
    ("NG-0011", "oleic acid", "500 mL", 90.0, "flammables"),
    ("NG-0012", "oleylamine", "250 mL", 70.0, "flammables"),
    ("NG-0013", "acetone", "4 L", 99.5, "flammables"),
    ("NG-0014", "toluene", "1 L", 99.8, "flammables"),
    ("NG-0015", "hexane", "1 L", 95.0, "flammables"),
    ("NG-0016", "methanol", "1 L", 99.8, "flammables"),
]
# Prepared in the lab from the demo stocks: label, name, volume,
# [(catalogue name, molarity | None, volume fraction | None, stock drawn from, amount drawn)], location.
# Amounts: 50 mL × 0.20 mol/L × 128.41 g/mol CdO = 1.2841 g; 20 mL × 1.0 mol/L × 78.971 g/mol Se = 1.5794 g;
# 40 mL × 0.0625 mol/L × 325.82 g/mol Cs2CO3 = 0.8146 g (invented recipes).
MIXTURES = [
    ("NG-M01", "cadmium oleate 0.20 M in 1-octadecene", "50 mL",
     [("cadmium oxide", "0.20 mol/L", None, "NG-0001", "1.2841 g"),
      ("1-octadecene", None, "0.85", "NG-0010", "42.5 mL")], "glovebox"),
    ("NG-M02", "TOP-Se 1.0 M", "20 mL",
     [("selenium", "1.0 mol/L", None, "NG-0003", "1.5794 g"),
      ("trioctylphosphine", None, "0.9", "NG-0009", "18 mL")], "glovebox"),
    ("NG-M03", "cesium oleate 0.125 M in 1-octadecene", "40 mL",
     [("cesium carbonate", "0.0625 mol/L", None, "NG-0008", "0.8146 g"),
      ("1-octadecene", None, "0.9", "NG-0010", "36 mL")], "glovebox"),
]


# email, display name, role, member of the demo lab
ACCOUNTS = [
    ("researcher@example.org", "Demo researcher", "researcher", True),
    ("safety@example.org", "Demo safety officer", "safety_officer", False),
    ("manager@example.org", "Demo lab manager", "lab_manager", True),
    ("admin@example.org", "Demo administrator", "admin", False),
]


def load_demo(session: Session, catalogue: SubstanceCatalogue) -> tuple[dict[str, int], dict[str, str]]:
    """Create whatever of the demo scenario is missing.

    Returns counts of what was added and the passwords of the accounts created now
    (email -> password), to be shown once; accounts that exist keep their password.
    """
    added = {"labs": 0, "locations": 0, "stocks": 0, "mixtures": 0, "accounts": 0}
    passwords: dict[str, str] = {}
    lab = session.scalar(select(Lab).where(Lab.code == LAB.code))
    if lab is None:
        lab = inventory.create_record(session, Lab, LAB)
        added["labs"] += 1
    for email, name, role, member in ACCOUNTS:
        if session.scalar(select(User.id).where(User.email == email)) is None:
            password = secrets.token_urlsafe(12)
            identity.create_user(session, UserIn(email=email, display_name=name, role=role, password=password,
                                                 lab_ids=[lab.id] if member else []))
            passwords[email] = password
            added["accounts"] += 1
    places: dict[str, Location] = {}
    for name, (building, room, storage, kind) in LOCATIONS.items():
        place = session.scalar(select(Location).where(Location.building == building, Location.room == room, Location.storage == storage))
        if place is None:
            body = LocationIn(lab_id=lab.id, building=building, room=room, storage=storage, kind=kind)
            place = inventory.create_record(session, Location, body)
            added["locations"] += 1
        places[name] = place

    def substance_id(name: str) -> int:
        entry = catalogue.find(name)
        if entry is None:
            raise LookupError(f"demo substance {name!r} is not in the catalogue")
        return session.scalar(select(Substance.id).where(Substance.key == entry.key))

    for label, name, amount, purity, place in STOCKS:
        if session.scalar(select(Stock.id).where(Stock.label == label)) is None:
            inventory.create_stock(session, StockIn(label=label, substance_id=substance_id(name), lab_id=lab.id,
                                                    location_id=places[place].id, amount=amount, purity_percent=purity))
            added["stocks"] += 1
    for label, name, volume, parts, place in MIXTURES:
        if session.scalar(select(Mixture.id).where(Mixture.label == label)) is None:
            components = [ComponentIn(substance_id=substance_id(n), molarity=m, volume_fraction=Decimal(v) if v else None,
                                      source_stock_id=session.scalar(select(Stock.id).where(Stock.label == stock)),
                                      amount=amount)
                          for n, m, v, stock, amount in parts]
            inventory.create_mixture(session, MixtureIn(label=label, name=name, lab_id=lab.id, location_id=places[place].id,
                                                        volume=volume, components=components))
            added["mixtures"] += 1
    return added, passwords


# The CdSe run's product kept as a stock: label, amount as held, catalogue key, location
PRODUCT = ("NG-P01", "4.0 mL", "cadmium-selenide", "glovebox")
PRODUCT_OUTPUT = "CdSe cores in hexane (ICP-OES of a digest)"

# title, [(stock or mixture label, amount, step it is added at (0-based) or None: in the flask from the start)],
# steps, waste plan, end state
_INERT = "argon"
PROCEDURES = [
    ("CdSe cores by hot injection",
     [("NG-0001", "25.7 mg", None), ("NG-0011", "0.6 mL", None), ("NG-0010", "10 mL", None), ("NG-M02", "1.0 mL", 3),
      ("NG-0013", "40 mL", 6)],
     [("charge", None, "air", None, "CdO, oleic acid and 1-octadecene into a 50 mL three-neck flask"),
      ("degas", 120, "vacuum", 30, "until bubbling stops"),
      ("heat", 300, _INERT, None, "until the solution turns clear and colourless"),
      ("inject", 270, _INERT, None, "TOP-Se swiftly by syringe"),
      ("hold", 250, _INERT, 3, "growth"),
      ("cool", None, _INERT, None, "remove the mantle"),
      ("precipitate", None, "air", None, "acetone"),
      ("centrifuge", None, "air", 10, "4000 rpm, balanced, sealed tubes")],
     [("non-halogenated solvent with heavy metals", "supernatants and acetone washes", "45 mL"),
      ("contaminated solids", "gloves, wipes, pipette tips", None)],
     "approved"),
    ("CdSe/ZnS core-shell growth",
     [(PRODUCT[0], "2.0 mL", None), ("NG-0006", "110 mg", None), ("NG-0005", "16 mg", 2), ("NG-0009", "1.0 mL", 2),
      ("NG-0010", "8 mL", None), ("NG-0012", "2 mL", None), ("NG-0014", "10 mL", 4), ("NG-0013", "30 mL", 4)],
     [("charge", None, "air", None, "purified CdSe cores in hexane, zinc acetate, oleylamine, 1-octadecene"),
      ("degas", 100, "vacuum", 30, "removes hexane"),
      ("grow_shell", 240, _INERT, 60, "dropwise S in TOP, two monolayers"),
      ("cool", None, _INERT, None, None),
      ("precipitate", None, "air", None, "acetone; redisperse in toluene"),
      ("centrifuge", None, "air", 10, None)],
     [("non-halogenated solvent with heavy metals", "supernatants, toluene and acetone washes", "40 mL")],
     "submitted"),
    ("CsPbBr3 perovskite nanocrystals",
     [("NG-0007", "69 mg", None), ("NG-0010", "5 mL", None), ("NG-0011", "0.5 mL", 2), ("NG-0012", "0.5 mL", 2),
      ("NG-M03", "0.4 mL", 3), ("NG-0015", "10 mL", 5)],
     [("charge", None, "air", None, "PbBr2 and 1-octadecene"),
      ("degas", 120, "vacuum", 60, None),
      ("heat", 170, _INERT, None, "add oleic acid and oleylamine"),
      ("inject", 170, _INERT, None, "cesium oleate, then ice bath after 5 s"),
      ("cool", 0, _INERT, None, "ice-water bath"),
      ("centrifuge", None, "air", 10, "redisperse in hexane")],
     [("non-halogenated solvent with heavy metals", "supernatant, hexane washes (Pb)", "20 mL")],
     "draft"),
]


def load_demo_procedures(session: Session, rules) -> int:
    """The three demo procedures, in the states the scenario needs; returns how many were added."""
    from service.schemas import PlannedDrawIn, ProcedureIn, StepIn, WastePlanIn
    from service.store import procedures
    from service.store.models import Procedure

    researcher = session.scalar(select(User).where(User.email == "researcher@example.org"))
    officer = session.scalar(select(User).where(User.email == "safety@example.org"))
    lab = session.scalar(select(Lab).where(Lab.code == LAB.code))
    added = 0
    for title, draws, steps, waste, state in PROCEDURES:
        if session.scalar(select(Procedure.id).where(Procedure.title == title)) is not None:
            continue
        draw_bodies = []
        for label, amount, step in draws:
            stock = session.scalar(select(Stock.id).where(Stock.label == label))
            mixture = session.scalar(select(Mixture.id).where(Mixture.label == label))
            draw_bodies.append(PlannedDrawIn(stock_id=stock, mixture_id=None if stock else mixture, amount=amount,
                                             step=step) if stock or mixture else None)
        if None in draw_bodies:
            continue  # draws from a product not made yet: added once its run has made it (load_scenario)
        body = ProcedureIn(
            lab_id=lab.id, title=title,
            steps=[StepIn(operation=o, temperature_c=t, atmosphere=a, duration_min=d, note=n) for o, t, a, d, n in steps],
            draws=draw_bodies,
            waste_plan=[WastePlanIn(stream=s, contents=c, expected_amount=e) for s, c, e in waste],
        )
        session.info["actor"] = {"user_id": researcher.id, "label": researcher.email}
        proc = procedures.create_procedure(session, body, researcher)
        if state in ("submitted", "approved"):
            procedures.transition(session, proc, "submit", researcher, None, rules)
        if state == "approved":
            session.info["actor"] = {"user_id": officer.id, "label": officer.email}
            procedures.transition(session, proc, "approve", officer,
                                  "Reviewed: argon manifold and temperature controller checked; "
                                  "run in fume hood H2 with face shield for the injection.", rules)
        added += 1
    return added


CONTAINERS = [
    ("NG-W01", "non_halogenated_solvent_heavy_metals", "20 L"),
    ("NG-W02", "halogenated_solvent_heavy_metals", "10 L"),
    ("NG-W03", "aqueous_heavy_metals", "10 L"),
    ("NG-W04", "contaminated_solids", "5 kg"),
]


def load_demo_waste(session: Session, rules, tolerance, elements) -> int:
    """Four containers in the hood's satellite accumulation area and one closed CdSe run."""
    from service.schemas import ContainerIn, ElementAmountIn, EntryComponentIn, EntryIn, OutputIn, RunIn
    from service.store import runs, waste
    from service.store.models import Procedure, WasteContainer

    lab = session.scalar(select(Lab).where(Lab.code == LAB.code))
    saa = session.scalar(select(Location).where(Location.kind == "satellite_accumulation_area", Location.lab_id == lab.id))
    added = 0
    ids = {}
    for label, stream, capacity in CONTAINERS:
        found = session.scalar(select(WasteContainer).where(WasteContainer.label == label))
        if found is None:
            found = waste.create_container(session, ContainerIn(label=label, lab_id=lab.id, location_id=saa.id,
                                                                stream=stream, capacity=capacity))
            added += 1
        ids[label] = found.id
    proc = session.scalar(select(Procedure).where(Procedure.title == PROCEDURES[0][0], Procedure.state == "approved"))
    if added == 0 or proc is None:
        return added
    researcher = session.scalar(select(User).where(User.email == "researcher@example.org"))
    session.info["actor"] = {"user_id": researcher.id, "label": researcher.email}
    run = runs.start_run(session, RunIn(procedure_id=proc.id), researcher, rules)
    cd_in = sum(d.element_mass_ug.get("Cd", 0) for d in run.draws)
    se_in = sum(d.element_mass_ug.get("Se", 0) for d in run.draws)
    # Invented split of the metals: 70 % in the product, the rest in two supernatants and the solids.
    product = {"Cd": cd_in * 70 // 100, "Se": se_in * 70 // 100}
    first = {"Cd": cd_in * 22 // 100, "Se": se_in * 22 // 100}
    second = {"Cd": cd_in * 6 // 100, "Se": se_in * 6 // 100}
    solids = {s: total - product[s] - first[s] - second[s] for s, total in (("Cd", cd_in), ("Se", se_in))}

    def amounts(masses):
        return [ElementAmountIn(element=s, mass=f"{ug} ug") for s, ug in masses.items()]

    runs.add_output(session, run, OutputIn(label=PRODUCT_OUTPUT, method="measured", elements=amounts(product)))
    acetone = session.scalar(select(Substance.id).where(Substance.key == "acetone"))
    ode = session.scalar(select(Substance.id).where(Substance.key == "1-octadecene"))
    for description, masses, volume in (("first supernatant (ODE, acetone)", first, "25 mL"),
                                        ("second supernatant, acetone wash", second, "20 mL")):
        waste.add_entry(session, ids["NG-W01"], EntryIn(
            run_id=run.id, description=description, volume=volume, elements=amounts(masses),
            components=[EntryComponentIn(substance_id=acetone, volume="15 mL"),
                        EntryComponentIn(substance_id=ode, volume="5 mL")]), researcher.id, rules=rules)
    waste.add_entry(session, ids["NG-W04"], EntryIn(run_id=run.id, description="gloves, pipette tips, wipes",
                                                    mass="35 g", elements=amounts(solids)), researcher.id,
                    rules=rules)
    runs.close_run(session, run, tolerance, elements)
    return added


def load_demo_product(session: Session, elements) -> int:
    """The closed CdSe run's product kept as stock NG-P01 (its Cd and Se as measured); returns how many were added."""
    from service.schemas import ProductStockIn
    from service.store import runs
    from service.store.models import Run, RunOutput

    if session.scalar(select(Stock.id).where(Stock.label == PRODUCT[0])) is not None:
        return 0
    found = session.execute(select(Run, RunOutput.id).join(RunOutput, RunOutput.run_id == Run.id)
                            .where(RunOutput.label == PRODUCT_OUTPUT).order_by(Run.id).limit(1)).first()
    if found is None:
        return 0
    run, output_id = found
    label, amount, key, place = PRODUCT
    location = session.scalar(select(Location).where(Location.storage == LOCATIONS[place][2]))
    substance = session.scalar(select(Substance.id).where(Substance.key == key))
    researcher = session.scalar(select(User).where(User.email == "researcher@example.org"))
    session.info["actor"] = {"user_id": researcher.id, "label": researcher.email}
    runs.stock_output(session, run, output_id, ProductStockIn(label=label, location_id=location.id, amount=amount,
                                                              substance_id=substance), elements)
    return 1


def load_scenario(session: Session, catalogue: SubstanceCatalogue, rules, tolerance,
                  elements) -> tuple[dict[str, int], dict[str, str]]:
    """The whole demo scenario, whatever of it is missing: inventory and accounts, the procedures, the waste
    containers and the closed CdSe run, its product as a stock, and the core-shell procedure that draws from it.

    Returns what was added (counts by kind) and the passwords of the accounts created now.
    """
    added, passwords = load_demo(session, catalogue)
    added["procedures"] = load_demo_procedures(session, rules)
    added["waste containers"] = load_demo_waste(session, rules, tolerance, elements)
    added["product stocks"] = load_demo_product(session, elements)
    added["procedures"] += load_demo_procedures(session, rules)
    return added, passwords
