"""The drift tolerance between two drift measurements, and when Earth's drift gives power.

One home for the rule that the ``doppler_consistency`` check judges with and that follow-up
requests use to choose windows where that check will have power:

* tolerance between a measurement with drift resolution r and the reference (r_0), Hz/s:
  ``max(tolerance_hz_s, resolution_multiplier * hypot(r, r_0))``;
* a measurement gives the comparison power when Earth's drift there differs from the
  reference's by at least ``min_earth_drift_span_tolerances`` such tolerances (a transmitter
  that follows the observer then shows a residual drift that differs; common practice, no
  source).

The numbers come from the protocol's first ``doppler_consistency`` check; a protocol without
one uses :data:`DEFAULT_RULE` (0.02 Hz/s, no resolution term, 3 tolerances).
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:
    from confirm_service.protocol.loader import ProtocolLike

CHECK_KIND = "doppler_consistency"


@dataclass(frozen=True, slots=True)
class DriftRule:
    """Tolerance floor (Hz/s), resolution multiplier, and tolerances needed for power."""

    tolerance_hz_s: float
    resolution_multiplier: float
    power_tolerances: float

    def tolerance(self, resolution_hz_s: float, reference_resolution_hz_s: float) -> float:
        """Tolerance (Hz/s) between a measurement and the reference."""
        combined = math.hypot(resolution_hz_s, reference_resolution_hz_s)
        return max(self.tolerance_hz_s, self.resolution_multiplier * combined)

    def tolerances_apart(self, earth_drift_difference_hz_s: float, tolerance_hz_s: float) -> float:
        """How many tolerances Earth's drift moved between the two measurements."""
        return abs(earth_drift_difference_hz_s) / tolerance_hz_s

    def has_power(self, earth_drift_difference_hz_s: float, tolerance_hz_s: float) -> bool:
        """Earth's drift moved enough for the comparison to tell sky-fixed from local."""
        apart = self.tolerances_apart(earth_drift_difference_hz_s, tolerance_hz_s)
        return apart >= self.power_tolerances


DEFAULT_RULE = DriftRule(tolerance_hz_s=0.02, resolution_multiplier=0.0, power_tolerances=3.0)


def rule_of(params: Any) -> DriftRule:
    """The rule of a doppler_consistency check's parameters."""
    return DriftRule(
        params.tolerance_hz_s, params.resolution_multiplier, params.min_earth_drift_span_tolerances
    )


def drift_rule(protocol: ProtocolLike) -> DriftRule:
    """The rule of the protocol's first doppler_consistency check (else DEFAULT_RULE)."""
    from confirm_service.protocol.loader import model_of  # the loader imports every check

    for stage in model_of(protocol).stages:
        for check in stage.checks:
            if getattr(check, "kind", None) == CHECK_KIND:
                return rule_of(check)
    return DEFAULT_RULE
