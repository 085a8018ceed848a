"""Read-only access to the store for the dashboard (no writes, short read transactions)."""
from __future__ import annotations


def open_reader(plant):
    """A reader of the plant's store, or None when no store exists yet."""
    return None
