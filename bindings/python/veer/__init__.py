"""veer: time-optimal trajectories for wheeled target carts (Python binding).

    import veer
    p = veer.plan("examples/scenarios/north_lane3_steered.json")
    print(p.duration, [leg.duration for leg in p.legs])
    s = p.sample(1.5)          # pose, twist, acceleration, module setpoints
    tab = p.table(50.0)        # the same as numpy arrays at 50 Hz
    data = p.to_bytes()        # the Plan message a cart receives
    q = veer.Plan.from_bytes(data)

CAUTION: the planner is not a safety-rated function. A hardware emergency
stop, the range's safety rules and its safety officer always come first.

The shared library is found through VEER_LIBRARY, the package folder, or the
build folders of the source tree (see veer._lib)."""

from ._version import __version__
from ._lib import LibraryNotFound
from ._pb import SCHEMA_VERSION
from .plan import PHASE_NAMES, LegTiming, Plan, PlanError, Sample, Table, library, plan

SAFETY_CAUTION = ("veer's planner is not a safety-rated function. A hardware emergency stop, the range's safety "
                  "rules and its safety officer always come first.")

__all__ = ["plan", "Plan", "PlanError", "Sample", "Table", "LegTiming", "PHASE_NAMES", "LibraryNotFound",
           "SCHEMA_VERSION", "SAFETY_CAUTION", "library", "__version__"]
