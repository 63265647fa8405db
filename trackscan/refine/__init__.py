"""Refinement: locate each structural change with as few new densities as possible.

``refine_frames(frames, evaluate=..., tolerance=...)`` is the loop (library
level); ``refine_manifest(manifest, ...)`` runs it on a scan manifest with
its generator, saving and recording every new frame before the next step.
Proposals: bisection and fold extrapolation (:mod:`.proposals`).
"""

from trackscan.refine.estimates import annotate_changes
from trackscan.refine.loop import MIN_TOLERANCE, Probe, RefineResult, plan_round, refine_frames
from trackscan.refine.proposals import (
    BISECTION, FOLD, FoldFit, FoldSample, Proposal, bisection_count, fit_fold, propose_bisection,
    propose_fold,
)

__all__ = ["refine_frames", "plan_round", "annotate_changes", "Probe", "RefineResult",
           "FoldSample", "FoldFit", "Proposal", "fit_fold", "propose_fold", "propose_bisection",
           "bisection_count", "BISECTION", "FOLD", "MIN_TOLERANCE"]
