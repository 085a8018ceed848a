"""One small exception hierarchy: every domain error the CLI turns into one clear message."""


class BeltwaveError(Exception):
    """Root of all errors the tool reports to a user without a traceback."""


class ConfigError(BeltwaveError):
    """The plant description is wrong; ``problems`` lists each one with its path."""

    def __init__(self, source: str, problems: list[str]):
        self.source = source
        self.problems = list(problems)
        lines = "\n".join(f"  - {p}" for p in self.problems)
        super().__init__(f"{source}: {len(self.problems)} problem(s) in the plant description:\n{lines}")


class InputError(BeltwaveError):
    """A command-line value or a simulation input is out of its allowed range."""


class DataError(BeltwaveError):
    """A log file or the store holds data the tool cannot use."""


class FitError(BeltwaveError):
    """A fit could not be carried out."""


class InfeasiblePlanError(BeltwaveError):
    """No setting meets the targets under the constraints."""


class LogFileError(DataError):
    """A whole log file cannot be read (empty, binary, unknown layout, missing required column).

    Row-level problems never raise: those rows go to the quarantine with a reason.
    """

    def __init__(self, path, message: str):
        self.path = str(path)
        self.reason = message
        super().__init__(f"{self.path}: {message}")


class StoreError(DataError):
    """The store cannot be opened or written as asked (schema version, read-only open, bad URL)."""
