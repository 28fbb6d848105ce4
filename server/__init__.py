"""Panelwright: panelboard schedules, load roll-up and feeder sizing for low-voltage distribution."""

__version__ = "0.1.0"
