"""labelcalc: from a food product formula to the figures and drafts a food label needs.

Every output is a draft that must be checked against current local regulation
by a qualified regulatory professional.
"""

__version__ = "0.1.0"
