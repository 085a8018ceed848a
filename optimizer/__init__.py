"""beltwave engine: properties → line model → logs → fit → recommend → nightly job.

No web code lives here; the dashboard package reads what this package stores.
"""

__version__ = "0.1.0"
