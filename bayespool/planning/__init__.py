"""The planner: the next batch of pools that tells the most about the undecided specimens.

``plan(run, assay)`` decodes (or takes a posterior), draws joint posterior samples of the statuses
(:mod:`.draws`), builds candidate follow-up pools (:mod:`.candidates`), scores them by expected
information gain over the draws (:mod:`.information`) and picks a batch greedily with the earlier
picks accounted for (:mod:`.greedy`); :mod:`.planner` ties them together and :mod:`.ids` names the
new pools. The result is a :class:`~.result.Plan`: the next pools in the layout format with fresh
pool IDs. A run with no pools (only a samples list) gets a first stage.

This module holds only the defaults and imports the numerical parts lazily, so that the command
line starts fast.
"""
from importlib import import_module

DEFAULT_TESTS = 96               # one plate
DEFAULT_MAX_POOL_SIZE = 16       # within what pooling validations commonly cover (common practice)
DEFAULT_MIN_INFORMATION = 0.001  # bits: a test expected to tell less is not worth a well
DEFAULT_DRAWS = 1000             # joint posterior draws that information is estimated over
DEFAULT_MAX_LINKED = 22          # = bayespool.decoders.exact.EXACT_LIMIT (a test checks it)

_EXPORTS = {"plan": ".planner", "Plan": ".result", "posterior_draws": ".draws",
            "joint_information": ".information", "pool_information": ".information"}

__all__ = sorted(_EXPORTS) + ["DEFAULT_TESTS", "DEFAULT_MAX_POOL_SIZE", "DEFAULT_MIN_INFORMATION",
                              "DEFAULT_DRAWS", "DEFAULT_MAX_LINKED"]


def __getattr__(name):
    if name in _EXPORTS:
        return getattr(import_module(_EXPORTS[name], __name__), name)
    raise AttributeError(f"module 'bayespool.planning' has no attribute {name!r}")
