"""Pure chemistry core: formulas, quantities, element content, CAS numbers, the catalogue.

Nothing in this package imports Flask or the database; everything a number depends on
is an argument.
"""
