"""The submittal PDF set: panel schedules, transformer schedule, load calculation summaries.

Layers (each a module):

* :mod:`server.pdf.deltas` — pure: what changed between two issued project files.
* :mod:`server.pdf.sheets` — builds one typed context per sheet from the engine's result
  objects (no second calculation: only selection and formatting).
* :mod:`server.pdf.render` — Jinja templates in ``templates/pdf/`` → HTML → WeasyPrint PDF
  per sheet, in parallel, cached by content hash, merged with pikepdf.
"""
