"""Domain errors and the exit codes they map to.

Every error a user can cause is a :class:`ThreshError`; the CLI maps them to exit codes in one
place (:mod:`thresh2hdl.app.cli`), so a user sees one line and never a traceback.
"""

__all__ = ["ThreshError", "InputError", "MismatchError", "ToolError", "DoesNotFitError",
           "UndecidedError", "EXIT_OK", "EXIT_MISMATCH", "EXIT_INPUT", "EXIT_UNDECIDED",
           "EXIT_INTERNAL"]

EXIT_OK = 0
EXIT_MISMATCH = 1
EXIT_INPUT = 2
EXIT_UNDECIDED = 3
EXIT_INTERNAL = 4


class ThreshError(Exception):
    """Base of all errors meant for the user; the message is one line that says what to do."""

    exit_code = EXIT_INPUT


class InputError(ThreshError):
    """A model file, option or data file is not acceptable. Names the file and the field."""

    def __init__(self, message, *, source=None, field=None):
        self.source = source
        self.field = field
        where = ""
        if source is not None:
            where += f"{source}: "
        if field is not None:
            where += f"{field}: "
        super().__init__(where + message)


class ToolError(ThreshError):
    """An external tool (Yosys, a simulator) is missing or failed."""


class DoesNotFitError(ThreshError):
    """The design needs more of a resource than the target device has (exit 2, like bad input:
    the design, not the tool, has to change). ``figures``: the synthesis figures, not placed."""

    def __init__(self, message, *, figures):
        self.figures = figures
        super().__init__(message)


class MismatchError(ThreshError):
    """The hardware disagreed with the integer reference model."""

    exit_code = EXIT_MISMATCH


class UndecidedError(ThreshError):
    """A proof neither succeeded nor found a confirmed counterexample (a timeout, say)."""

    exit_code = EXIT_UNDECIDED
