"""Field names of the answer that are API, pinned once for every layer.

Written out by hand, not read from the contract's classes, so that a renamed field fails the
tests of the service's JSON and of the client's tables alike.
"""

from __future__ import annotations

# One variable's fields after its name, in order (docs/contract.md, Sections: `variables[]`;
# docs/contract.md, Python client: the columns of `Assessment.to_frame()`).
VARIABLE_FIELDS = ("vif", "tolerance", "r_squared", "se_inflation", "above_threshold", "aliased")

# The fields options.uncertainty fills, after those above (null without the option), of a
# variable and of a term, and the columns they add to the client's frames (docs/contract.md).
UNCERTAINTY_VARIABLE_FIELDS = (
    "vif_interval",
    "threshold_p_value",
    "share_above_threshold",
    "share_dropped",
)
UNCERTAINTY_TERM_FIELDS = (
    "gvif_interval",
    "gvif_scaled_interval",
    "share_above_threshold",
    "share_dropped",
)
UNCERTAINTY_FRAME_COLUMNS = (
    "vif_low",
    "vif_high",
    "threshold_p_value",
    "share_above_threshold",
    "share_dropped",
)
