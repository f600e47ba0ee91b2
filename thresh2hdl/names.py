"""Verilog and VHDL identifier rules for module and port names taken from a model file, and the
names of the signals that the circuit makes and the proof reads (one definition for both sides)."""

import re

__all__ = ["VERILOG_KEYWORDS", "VHDL_RESERVED", "check_identifier", "vhdl_name_problem", "GUARD_FLAG", "SCORE_CONST", "register_name",
           "valid_name", "unit_prefix", "argmax_names", "argmax_compare_name",
           "flag_part_name", "weight_name", "bias_name", "weight_registers", "entered_name",
           "LEARN_ENABLE", "LEARN_TARGET", "learn_step_name", "positive_name",
           "learn_mistake_name", "learn_move_name", "clamped_name"]

GUARD_FLAG = "guard_flag"     # the input guard's out-of-range flag, made at the inputs
SCORE_CONST = "score_const"   # a bank unit's score when every weight is 0 (after its prefix)


def flag_part_name(layer, group, last):
    """Group ``group`` of layer ``layer`` of the out-of-range flag's OR tree; the flag itself
    when it is the ``last`` layer's one group."""
    return GUARD_FLAG if last else f"{GUARD_FLAG}{layer}_{group}"


def clamped_name(feature):
    """The input guard's wire that carries feature ``feature`` (a name) clamped to its range."""
    return f"{feature}_clamped"


def register_name(value, stage):
    """The pipeline register that carries ``value`` into register stage ``stage``."""
    return f"{value}_r{stage}"


def valid_name(stage):
    """The valid bit of register stage ``stage`` (1 is the first)."""
    return f"valid_s{stage}"


def unit_prefix(index):
    """What starts the name of every value of a bank's unit ``index``."""
    return f"u{index}_"


def weight_name(prefix, index):
    """A loadable weight register: feature ``index``'s weight of the unit named by
    ``prefix`` (a bank unit's :func:`unit_prefix`, else empty)."""
    return f"{prefix}weight{index}"


def bias_name(prefix):
    """A loadable bias register of the unit named by ``prefix``."""
    return f"{prefix}bias"


def weight_registers(model):
    """Every loadable register's name and trained value, in the write port's address order
    (each unit's weights, then its bias)."""
    registers = []
    for u, unit in enumerate(model.units):
        prefix = unit_prefix(u) if model.is_bank else ""
        registers += [(weight_name(prefix, i), w) for i, w in enumerate(unit.weights)]
        registers.append((bias_name(prefix), unit.bias))
    return registers


# On-chip learning: the values carried beside a vector to where its result leaves.
LEARN_ENABLE = "learn_enable_s"     # the sample is labelled
LEARN_TARGET = "learn_target_s"     # its target bits, one per unit


def entered_name(bias):
    """The bias register ``bias`` as the vector entered, carried beside it."""
    return f"{bias}_entered"


def zero_name(value):
    """Whether sum ``value`` is zero, tested from its two operands (the form built for
    speed: the decision then waits for the adder's sign alone)."""
    return f"{value}_zero"


# The write port's data, held a cycle (on-chip learning's form built for speed).
HELD_WRITE_DATA = "weight_data_r"


def held_data_name(copy):
    """The port's data held a cycle for bias copy ``copy`` alone (beside its long adder)."""
    return f"{copy}_data"


def written_name(copy):
    """Whether the port wrote learning copy ``copy`` a cycle ago (its write lands now)."""
    return f"{copy}_written"


def learned_name(register):
    """The update's own copy of weight or bias register ``register`` (the form built for
    speed): the port writes it and the update moves it; ``register`` follows it a cycle
    later."""
    return f"{register}_learned"


# The registered read-back (the form built for speed): a register per group of
# READ_GROUP registers, chosen by the address's low bits, and the address's high bits.
READ_GROUP = 4
LEARN_READ_HIGH = "learn_read_high"


def learn_read_group_name(group):
    """The read-back's register of group ``group`` (registers ``4 group`` to ``4 group + 3``)."""
    return f"learn_read_g{group}"


def learn_mistake_name(unit):
    """Unit ``unit``'s mistake on a labelled sample, made where its decision is (the
    ``dsp_products`` form registers it, so the update's enable starts at a flip-flop)."""
    return f"learn_mistake{unit}"


def learn_move_name(index):
    """Feature ``index``'s step signed towards the sample's target (the ``dsp_products``
    form carries it in place of the step)."""
    return f"learn_move{index}"


def learn_step_name(index):
    """Feature ``index``'s step of the update (``eta x``), carried beside the vector."""
    return f"learn_step{index}"


def positive_name(score):
    """A bank unit's own decision, ``score > 0`` (one-vs-rest learning reads it)."""
    return f"{score}_positive"


def argmax_names(tag):
    """The winning score and its class of the argmax comparison ``tag``."""
    return f"{tag}_score", f"{tag}_class"


def argmax_compare_name(tag):
    """Whether the left input wins the argmax comparison ``tag`` (a tie included)."""
    return f"{tag}_left_wins"

# Reserved words of IEEE 1364-2005 (Verilog) plus IEEE 1800-2017 (SystemVerilog), so that a name
# accepted here is also usable when the file is read by a SystemVerilog front end. From the
# keyword tables (Annex B) of both standards.
VERILOG_KEYWORDS = frozenset("""
accept_on alias always always_comb always_ff always_latch and assert assign assume automatic before
begin bind bins binsof bit break buf bufif0 bufif1 byte case casex casez cell chandle checker class
clocking cmos config const constraint context continue cover covergroup coverpoint cross deassign
default defparam design disable dist do edge else end endcase endchecker endclass endclocking
endconfig endfunction endgenerate endgroup endinterface endmodule endpackage endprimitive
endprogram endproperty endspecify endsequence endtable endtask enum event eventually expect export
extends extern final first_match for force foreach forever fork forkjoin function generate genvar
global highz0 highz1 if iff ifnone ignore_bins illegal_bins implements implies import incdir
include initial inout input inside instance int integer interconnect interface intersect join
join_any join_none large let liblist library local localparam logic longint macromodule matches
medium modport module nand negedge nettype new nexttime nmos nor noshowcancelled not notif0 notif1
null or output package packed parameter pmos posedge primitive priority program property protected
pull0 pull1 pulldown pullup pulsestyle_ondetect pulsestyle_onevent pure rand randc randcase
randsequence rcmos real realtime ref reg reject_on release repeat restrict return rnmos rpmos rtran
rtranif0 rtranif1 s_always s_eventually s_nexttime s_until s_until_with scalared sequence shortint
shortreal showcancelled signed small soft solve specify specparam static string strong strong0
strong1 struct super supply0 supply1 sync_accept_on sync_reject_on table tagged task this
throughout time timeprecision timeunit tran tranif0 tranif1 tri tri0 tri1 triand trior trireg type
typedef union unique unique0 unsigned until until_with untyped use uwire var vectored virtual void
wait wait_order wand weak weak0 weak1 while wildcard wire with within wor xnor xor
""".split())

# A deliberately plain subset of Verilog simple identifiers: no `$`, no escaped identifiers, so
# the name is also a valid file name, C++ identifier (Verilator) and Python identifier.
_IDENTIFIER = re.compile(r"[A-Za-z_][A-Za-z0-9_]*\Z")
MAX_IDENTIFIER_LENGTH = 64


def check_identifier(name, what):
    """Return ``name`` if it is a usable Verilog identifier; raise ``ValueError`` saying why not."""
    if not isinstance(name, str):
        raise ValueError(f"{what} must be a string, not {type(name).__name__}")
    if not _IDENTIFIER.match(name):
        raise ValueError(f"{what} must be a Verilog identifier (letters, digits, '_', not starting "
                         f"with a digit), not {name!r}")
    if len(name) > MAX_IDENTIFIER_LENGTH:
        raise ValueError(f"{what} must be at most {MAX_IDENTIFIER_LENGTH} characters, "
                         f"not {len(name)}")
    if name in VERILOG_KEYWORDS:
        raise ValueError(f"{what} {name!r} is a Verilog keyword; choose another name")
    if name.startswith("_"):
        raise ValueError(f"{what} must not start with '_' (reserved for generated names), "
                         f"not {name!r}")
    return name


# Reserved words of IEEE 1076-2008 (VHDL) (from memory of the standard's list of reserved
# words), and the library, type and function names the VHDL writer uses, which a port of the
# same name would hide. VHDL does not tell upper from lower case.
VHDL_RESERVED = frozenset("""
abs access after alias all and architecture array assert assume assume_guarantee attribute begin
block body buffer bus case component configuration constant context cover default disconnect
downto else elsif end entity exit fairness file for force function generate generic group guarded
if impure in inertial inout is label library linkage literal loop map mod nand new next nor not
null of on open or others out package parameter port postponed procedure process property
protected pure range record register reject release rem report restrict restrict_guarantee return
rol ror select sequence severity shared signal sla sll sra srl strong subtype then to transport
type unaffected units until use variable vmode vprop vunit wait when while with xnor xor
ieee std work std_logic std_ulogic std_logic_vector std_ulogic_vector std_logic_1164 numeric_std
signed unsigned resize rising_edge natural integer boolean textio line
""".split())


def vhdl_name_problem(name):
    """Why a (Verilog-legal) name cannot name a VHDL port or entity, or None if it can."""
    if name.lower() in VHDL_RESERVED:
        return f"{name!r} is reserved in VHDL (or names a type or function the VHDL uses)"
    if "__" in name or name.endswith("_"):
        return f"{name!r} has two '_' in a row or ends in '_', which VHDL does not allow"
    return None
