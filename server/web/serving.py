"""How the serving process is prepared once the app is built (``panelwright serve``).

The server keeps every open project's model and results in memory for the life of the
process (a 500-panel project is about a million objects), and each edit allocates a few
thousand short-lived objects while building its answer.  With Python's default young
threshold (700 objects) a young collection runs on nearly every edit and walks the new
results that the cache has just taken in; the tracked objects made at start-up (modules,
mappers, compiled templates) are walked again by every full collection.

So, once the app is built and before the first request: collect, then freeze what is alive
(:func:`gc.freeze`: start-up objects leave the collector's working set for good), and raise
the young threshold (``PANELWRIGHT_GC_YOUNG_THRESHOLD``) so young collections run every few
dozen requests instead of on every edit.  Nothing here changes what is computed or stored.
"""

from __future__ import annotations

import gc

from server.config import Settings


def prepare_process(settings: Settings) -> tuple[int, int, int]:
    """Tune the garbage collector for serving; returns the thresholds now in force."""
    gc.collect()
    gc.freeze()
    if settings.gc_young_threshold > 0:
        _young, middle, old = gc.get_threshold()
        gc.set_threshold(settings.gc_young_threshold, middle, old)
    return gc.get_threshold()
