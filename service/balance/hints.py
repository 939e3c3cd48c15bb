"""Where the missing (or surplus) metal of an element balance may have gone.

Short, practical prompts for the researcher, chosen by the sign of the unaccounted mass and
by what the balance contains. They are suggestions to check, not findings.
"""

from __future__ import annotations

__all__ = ["hints_for", "notes_for"]

_MISSING = (
    "residue left on glassware, stir bars, septa or needles: rinse them (e.g. with dilute acid) "
    "and enter the rinse as a waste entry",
    "a supernatant or wash that was not entered: check every centrifuge tube and beaker",
    "filter paper, gloves, pipette tips or wipes not entered in the contaminated-solids container",
    "product assay low: check the digestion, the dilution and the calibration",
)
_SURPLUS = (
    "an entry counted twice: the same supernatant or wash entered in two containers, or a "
    "correction entered while the original still counts in full",
    "product assay high: check the dilution, the blank and the calibration",
    "an input not recorded: a draw or top-up that is missing from the run",
)


def hints_for(element: str, input_ug: int, unaccounted_ug: int, *, has_estimate: bool) -> tuple[str, ...]:
    """Hints for an element balance that does not close.

    :param element: the element symbol, for the wording
    :param input_ug: total input of the element, in µg
    :param unaccounted_ug: input − product − waste − losses, in µg (its sign selects the hints)
    :param has_estimate: True when a product of this element was estimated (e.g. from absorbance)
    :returns: the hints, most likely first; empty when nothing is unaccounted
    """
    if unaccounted_ug == 0:
        return ()
    if unaccounted_ug > 0:
        found = list(_MISSING)
        if has_estimate:
            found.append("the product was estimated: measure its metal content (e.g. ICP after digestion)")
        found.append("an unavoidable loss (e.g. film left in the reaction flask) not declared as a loss")
        return tuple(found)
    if input_ug == 0:
        first = (
            f"{element} appears in the outputs but in no input: a draw missing from the run "
            f"(e.g. a {element} precursor for a shell) or an output entered with the wrong element"
        )
        return (first,) + _SURPLUS[:2]
    found = list(_SURPLUS)
    if has_estimate:
        found.insert(1, "the product was estimated: the estimate may be high; measure it")
    return tuple(found)


def notes_for(*, by_difference: bool, clamped: bool, within_uncertainty: bool, band_ug: int) -> tuple[str, ...]:
    """Remarks on how the balance was reached (not reasons for missing metal).

    :param by_difference: a product took the remainder of this element
    :param clamped: the by-difference product would have been negative and was set to 0
    :param within_uncertainty: the unaccounted part lies within the estimate's band
    :param band_ug: the uncertainty band of the estimated products, in µg
    :returns: the notes, possibly empty
    """
    notes = []
    if by_difference and not clamped:
        notes.append(
            "closes by construction: the product was taken by difference, so this balance cannot "
            "show missing metal"
        )
    if clamped:
        notes.append("the recorded outputs already exceed the input; the by-difference product is set to 0")
    if within_uncertainty:
        notes.append(f"within the estimate's uncertainty (±{band_ug} µg)")
    return tuple(notes)
