"""The sweep's view of :mod:`core.targets` (kept so that ``core.sweep.targets`` imports still work)."""
from ..targets import SWEEP_PARAMETER, prepare_target, set_target, sweep_targets, target_unit

__all__ = ["SWEEP_PARAMETER", "sweep_targets", "prepare_target", "set_target", "target_unit"]
