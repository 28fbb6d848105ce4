"""The calculation layer: pure, typed, standard library only.

Nothing here imports FastAPI, SQLAlchemy or Jinja (a test checks).  Inputs are the frozen
dataclasses of :mod:`server.calc.model` (the version-1 project file); outputs are the frozen
results of :mod:`server.calc.results`.
"""
