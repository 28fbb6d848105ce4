"""Data access: ``select()`` queries with keyword-only arguments, one module per aggregate."""
