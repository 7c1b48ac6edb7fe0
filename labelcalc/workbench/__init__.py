"""The local workbench: ``labelcalc serve [FOLDER]`` (a Starlette app bound to 127.0.0.1 by default)."""
