"""What every component shares: it is built from its :class:`~.plan.DesignPlan`, kept as
``design``, and answers the plan's questions (latency, levels, analyses...) with the plan's
answers, so that whatever reads a design takes a plan or a component alike."""

from operator import attrgetter

from amaranth.lib import wiring

from .plan import plan_design

__all__ = ["PlannedComponent", "PLAN_FACTS"]

# The DesignPlan attributes a component reads through (every one the same for each kind).
PLAN_FACTS = ("config", "unit_analyses", "analysis", "bank", "levels", "final_level",
              "register_boundaries", "level_stage", "stage_levels", "split_parts",
              "result_parts", "latency", "beats", "feature_count", "stream")


class PlannedComponent(wiring.Component):
    """A component of one design kind (``kind``: :attr:`DesignPlan.kind`), built from the
    plan of its :class:`~.config.UnitConfig`; ``design`` is that plan."""

    kind = None

    def __new__(cls, config, *, src_loc_at=0):
        # Planned before the component exists: a refused configuration leaves no component
        # behind to be reported as "created but never used".
        design = plan_design(config)
        if design.kind != cls.kind:
            raise ValueError(f"a {cls.__name__} builds a {cls.kind} design, this configuration "
                             f"is a {design.kind} one; make_component picks the component")
        self = super().__new__(cls, src_loc_at=src_loc_at + 1)
        self._design = design
        return self

    def __init__(self, config, *, src_loc_at=0):
        super().__init__(self._design.signature, src_loc_at=src_loc_at + 1)

    @property
    def design(self):
        """The design's :class:`~.plan.DesignPlan`."""
        return self._design

    @property
    def feature_ports(self):
        """The input ports that carry the features (serial: the one sample port)."""
        return [getattr(self, f"x{i}") for i in range(self._design.feature_count)]

    @property
    def score_ports(self):
        """The score output ports, in unit order (none when the model omits them)."""
        return [getattr(self, name) for name, _ in self._design.score_outputs]


for _fact in PLAN_FACTS:
    setattr(PlannedComponent, _fact,
            property(attrgetter(f"_design.{_fact}"), doc=f"``design.{_fact}``"))
del _fact
