"""How the long steps of build, check, prove and estimate tell how they go: one interface.

A run may sit for minutes in a simulator, a solver or place-and-route; the caller hears of each
step through one object. The command line prints it to stderr (``cli._Progress``); a library
caller passes its own, or nothing.
"""

__all__ = ["Progress", "progress_of"]


class Progress:
    """What a long run tells as it goes; this one tells nobody. Override either method.

    ``note(text)``: one line per step ("verifying in icarus: ..."). Calling the object,
    ``progress(done, total, text)``: how far a long step is, ``done`` of ``total`` (``text``
    names the step: "simulating", "verifying in verilator").
    """

    def note(self, text):
        """A step begins (or a tool does something slow, such as a first-use compile)."""

    def __call__(self, done, total, text="simulating"):
        """``done`` of ``total`` of the step ``text``."""


def progress_of(progress):
    """``progress`` itself, or a silent :class:`Progress` for None; anything else with a
    callable ``note`` and a call of ``(done, total, text)`` will do (duck typing)."""
    if progress is None:
        return Progress()
    if not callable(progress) or not callable(getattr(progress, "note", None)):
        raise TypeError("progress must be a thresh2hdl.app.Progress (or have its note(text) "
                        "and a call of (done, total, text)), or None")
    return progress
