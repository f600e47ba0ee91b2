"""How a design is clocked: its reset (synchronous or asynchronous, active high or low) and an
optional clock enable.

The components use the ``sync`` domain as always; the reset's kind is the domain's
(:func:`reset_domain`, given where the design is converted or simulated), and its polarity is
an inverter in front of the port (:mod:`thresh2hdl.emit.netlist`), so one circuit serves all
four. The clock enable wraps the whole design in Amaranth's ``EnableInserter``: while it is
low every register holds, and the handshake outputs that start transfers (``in_ready``,
``out_valid``) read 0, so no transfer happens in a held cycle. The reset acts whatever the
enable (the domain's reset has priority over the enable, as Amaranth builds it).
"""

from amaranth.hdl import ClockDomain, EnableInserter

__all__ = ["RESET_KINDS", "DEFAULT_RESET", "reset_is_async", "reset_is_low", "reset_domain",
           "reset_port", "enabled", "gated"]

RESET_KINDS = ("sync-high", "sync-low", "async-high", "async-low")
DEFAULT_RESET = "sync-high"


def reset_is_async(kind):
    """Whether the reset clears the registers at once, without waiting for a clock edge."""
    return kind.startswith("async")


def reset_is_low(kind):
    """Whether the reset is asserted by a low level (its port then ends in ``_n``)."""
    return kind.endswith("-low")


def reset_domain(kind, name="sync"):
    """The clock domain of a design with this reset kind (the reset itself active high:
    :func:`reset_port` says how the port drives it)."""
    return ClockDomain(name, async_reset=reset_is_async(kind))


def reset_port(kind, name):
    """The reset port's name: the model's ``name``, with ``_n`` appended when active low."""
    return f"{name}_n" if reset_is_low(kind) else name


def enabled(component, module):
    """``module`` with every register held while the component's clock enable is low (the
    module itself when the design has no enable)."""
    if not component.config.clock_enable:
        return module
    return EnableInserter(component.ce)(module)


def gated(component, value):
    """A handshake output that starts a transfer: 0 while the clock enable is low."""
    if not component.config.clock_enable:
        return value
    return value & component.ce
