"""Pure rule engine: rule-pack models, loader, measure registry, evaluator and findings.

Nothing here imports Flask or the database; the store builds the subject facts
(:mod:`service.rules.subjects`) and the evaluator returns frozen findings.
"""

from service.rules.evaluate import SEVERITY, Finding, evaluate, highest_level
from service.rules.loader import ActiveRule, LayeredRules, load_pack, load_packs
from service.rules.measures import MEASURES, Measure, MeasureNameError, MeasureResult, vocabulary
from service.rules.model import COMPARATORS, LEVELS, SCOPES, Rule, RulePack, SuggestedCode
from service.rules.subjects import INERT_ATMOSPHERES, ProcedureSubject, ReagentFacts, StepFacts

from service.rules import container_measures  # noqa: E402,F401,I001  (the waste_container measures register on import)
from service.rules import area_measures, generator  # noqa: E402,F401,I001  (accumulation_area, generator_month)

__all__ = [
    "ActiveRule",
    "COMPARATORS",
    "Finding",
    "INERT_ATMOSPHERES",
    "LEVELS",
    "LayeredRules",
    "MEASURES",
    "Measure",
    "MeasureNameError",
    "MeasureResult",
    "ProcedureSubject",
    "ReagentFacts",
    "Rule",
    "RulePack",
    "SCOPES",
    "SEVERITY",
    "StepFacts",
    "SuggestedCode",
    "evaluate",
    "highest_level",
    "load_pack",
    "load_packs",
    "vocabulary",
]
