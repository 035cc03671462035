"""Drivers: the loops around the core (live daemon, replay, reporting)."""
