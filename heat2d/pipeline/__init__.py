"""Chains the stages (:func:`run`) and the adaptive refinement loop."""

from .chain import STAGES, Progress, geometry_key, rebind, run

__all__ = ["STAGES", "Progress", "geometry_key", "rebind", "run"]
