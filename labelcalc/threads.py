"""One thread per numeric library (matrix products) in the ``labelcalc`` command, set before numpy loads.

A range run labels in as many worker processes as there are cores, each with one thread (see
:mod:`labelcalc.workers`); the command's own process labels with one thread too, so a run computes the same
floating-point figures, to the last digit, whatever ``--jobs`` says (a matrix library splits a product
differently among threads, which may move the last digit of an unrounded figure).  A number the user set
stays.  Imported for this effect by :mod:`labelcalc.cli` only: the Python API leaves the caller's setting be.
"""

from __future__ import annotations

import os

from labelcalc.workers import ONE_THREAD

for _name in ONE_THREAD:
    os.environ.setdefault(_name, "1")
