"""One router per resource: projects, tree, panels, transformers, warnings, api (and bench when enabled)."""
