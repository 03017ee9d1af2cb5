"""Which looks that saw nothing count as misses, and misses counted per observing session.

A look is a complete scan or a partner report that covered the predicted frequency and did not
see the signal there. It is a miss only if it could have seen the signal; otherwise it is
recorded as *not constraining*, with the reason and the numbers:

* **Below the horizon.** The target's highest elevation during the look (astropy alt/az through
  ``physics.max_elevation_deg``, the visibility engine) stayed below the site's elevation limit
  (``SiteFact.min_elevation_deg``; 0 deg, the geometric horizon, when the site states none).
* **Not sensitive enough.** The signal-to-noise ratio the look should have reached is below its
  own detection threshold. From the radiometer equation (Dicke 1946; e.g. Wilson, Rohlfs and
  Huttemeister, *Tools of Radio Astronomy*, chapter on radiometers; from memory): a channel of
  width B integrated for t seconds has noise SEFD / sqrt(n_pol B t) (Jy), and a signal narrower
  than the channel with flux F (W m^-2) adds F / B to one channel, so SNR = (F / SEFD)
  sqrt(n_pol t / B). The same transmitter seen at the reference (0) and at the look (p), with
  the same number of polarisations, gives::

      SNR_p = SNR_0 * (SEFD_0 / SEFD_p) * sqrt((t_p / B_p) / (t_0 / B_0))

  with t the duration of the scan (or report) and B its channel width (a report without its
  scan: the reference's). It needs the reference scan's SEFD, the look's SEFD and the look's
  threshold; a look that does not state them is counted as a miss (nothing shows that it could
  not have seen the signal) and says "sensitivity not stated".
* **Pointed elsewhere.** With the check's ``max_pointing_offset_deg`` set, a look whose stated
  pointing lies farther than that from the target (great-circle angle, haversine formula) did
  not look at it. The limit is the protocol's: it depends on the partners' beams.

**Sessions.** Misses are counted per observing session: one site and one night, the night being
the local mean solar date of the noon before the look's middle (longitude / 15 deg per hour),
so the on-source scans of one night's cadence are one miss, not three.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from datetime import UTC, datetime
from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:
    from confirm_service.protocol.facts import SiteFact
    from confirm_service.protocol.matching import CandidateView, ObservationView, ReportView

BELOW_HORIZON = "below_horizon"
BELOW_THRESHOLD = "below_threshold"
POINTED_ELSEWHERE = "pointed_elsewhere"
SENSITIVITY_NOT_STATED = "sensitivity not stated"
_DAY_S = 86_400.0
_NOON_S = 43_200.0
_SECONDS_PER_DEGREE_LONGITUDE = 240.0


@dataclass(frozen=True, slots=True)
class Look:
    """A scan or a report that covered the predicted frequency and did not see the signal."""

    label: str
    site: SiteFact
    start_unix_s: float
    duration_s: float
    channel_width_hz: float
    sefd_jy: float | None
    threshold_snr: float | None
    pointing_ra_deg: float | None = None
    pointing_dec_deg: float | None = None


@dataclass(frozen=True, slots=True)
class Judgement:
    """A look judged: its session, the target's highest elevation (deg), the expected SNR (if
    the numbers exist) and why it does not constrain (empty for a miss)."""

    look: Look
    session: str
    max_elevation_deg: float
    expected_snr: float | None
    reasons: tuple[str, ...]
    pointing_offset_deg: float | None = None

    @property
    def constraining(self) -> bool:
        """A miss: the look could have seen the signal."""
        return not self.reasons

    def record(self) -> dict[str, Any]:
        """JSON-ready details for the check result."""
        look = self.look
        entry: dict[str, Any] = {
            "look": look.label,
            "site": look.site.code,
            "session": self.session,
            "max_elevation_deg": round(self.max_elevation_deg, 2),
            "min_elevation_deg": look.site.min_elevation_deg,
            "expected_snr": None if self.expected_snr is None else round(self.expected_snr, 2),
            "threshold_snr": look.threshold_snr,
            "pointing_offset_deg": (
                None if self.pointing_offset_deg is None else round(self.pointing_offset_deg, 4)
            ),
        }
        if self.reasons:
            entry["reasons"] = list(self.reasons)
        elif self.expected_snr is None:
            entry["sensitivity"] = SENSITIVITY_NOT_STATED
        return entry


def scan_look(view: ObservationView) -> Look:
    """The look of a scan."""
    scan = view.observation
    return Look(
        f"scan {scan.id}",
        scan.site,
        scan.start_unix_s,
        scan.duration_s,
        scan.channel_width_hz,
        scan.sefd_jy,
        scan.threshold_snr,
        scan.pointing_ra_deg,
        scan.pointing_dec_deg,
    )


def report_look(view: ReportView, reference_channel_width_hz: float) -> Look:
    """The look of a report without its scan (channel width taken as the reference's)."""
    report = view.report
    return Look(
        f"report {report.id}",
        report.site,
        report.unix_s,
        report.duration_s,
        reference_channel_width_hz,
        report.sefd_jy,
        report.threshold_snr,
        report.pointing_ra_deg,
        report.pointing_dec_deg,
    )


def session_of(site: SiteFact, unix_s: float) -> str:
    """``CODE night of YYYY-MM-DD``: the site's local mean solar date of the preceding noon."""
    local_s = unix_s + site.longitude_deg * _SECONDS_PER_DEGREE_LONGITUDE - _NOON_S
    day = math.floor(local_s / _DAY_S) * _DAY_S
    return f"{site.code} night of {datetime.fromtimestamp(day, UTC).date().isoformat()}"


def expected_snr(
    reference_snr: float,
    reference_sefd_jy: float,
    reference_duration_s: float,
    reference_channel_width_hz: float,
    sefd_jy: float,
    duration_s: float,
    channel_width_hz: float,
) -> float:
    """SNR a look should reach for the reference's signal (radiometer equation, module doc)."""
    ratio = (duration_s / channel_width_hz) / (reference_duration_s / reference_channel_width_hz)
    return reference_snr * (reference_sefd_jy / sefd_jy) * math.sqrt(ratio)


def angular_separation_deg(
    ra1_deg: float, dec1_deg: float, ra2_deg: float, dec2_deg: float
) -> float:
    """Great-circle angle between two directions (deg), haversine formula."""
    ra1, dec1, ra2, dec2 = (math.radians(x) for x in (ra1_deg, dec1_deg, ra2_deg, dec2_deg))
    h = (
        math.sin((dec2 - dec1) / 2) ** 2
        + math.cos(dec1) * math.cos(dec2) * math.sin((ra2 - ra1) / 2) ** 2
    )
    return math.degrees(2.0 * math.asin(min(1.0, math.sqrt(h))))


def judge(
    context: CandidateView, look: Look, max_pointing_offset_deg: float | None = None
) -> Judgement:
    """Whether ``look`` could have seen the candidate's signal (see the module doc)."""
    facts = context.facts
    middle = look.start_unix_s + 0.5 * max(look.duration_s, 0.0)
    elevation = context.physics.max_elevation_deg(
        look.site, facts.target, look.start_unix_s, look.duration_s
    )
    reasons = []
    limit = look.site.min_elevation_deg
    if elevation < limit:
        reasons.append(
            f"{BELOW_HORIZON}: the target rose to at most {elevation:.1f} deg at "
            f"{look.site.code} during the look, below the site's limit of {limit:g} deg"
        )
    reference = facts.reference_observation
    snr = None
    if (
        reference.sefd_jy is not None
        and look.sefd_jy is not None
        and look.threshold_snr is not None
        and look.duration_s > 0
    ):
        snr = expected_snr(
            facts.reference.snr,
            reference.sefd_jy,
            reference.duration_s,
            reference.channel_width_hz,
            look.sefd_jy,
            look.duration_s,
            look.channel_width_hz,
        )
        if snr < look.threshold_snr:
            reasons.append(
                f"{BELOW_THRESHOLD}: expected SNR {snr:.1f} (discovery SNR "
                f"{facts.reference.snr:.1f} at SEFD {reference.sefd_jy:g} Jy; here SEFD "
                f"{look.sefd_jy:g} Jy, {look.duration_s:g} s, {look.channel_width_hz:g} Hz "
                f"channels) is below the look's threshold of {look.threshold_snr:g}"
            )
    offset = None
    if look.pointing_ra_deg is not None and look.pointing_dec_deg is not None:
        target = facts.target
        offset = angular_separation_deg(
            look.pointing_ra_deg, look.pointing_dec_deg, target.ra_deg, target.dec_deg
        )
        if max_pointing_offset_deg is not None and offset > max_pointing_offset_deg:
            reasons.append(
                f"{POINTED_ELSEWHERE}: the look pointed {offset:.3f} deg from the target, "
                f"beyond the protocol's {max_pointing_offset_deg:g} deg"
            )
    return Judgement(look, session_of(look.site, middle), elevation, snr, tuple(reasons), offset)


@dataclass(frozen=True, slots=True)
class Misses:
    """Judged looks: the misses grouped by session, and the looks that do not constrain."""

    judgements: tuple[Judgement, ...]

    @property
    def sessions(self) -> dict[str, list[str]]:
        """Session -> labels of its misses, in the order the looks came."""
        grouped: dict[str, list[str]] = {}
        for j in self.judgements:
            if j.constraining:
                grouped.setdefault(j.session, []).append(j.look.label)
        return grouped

    @property
    def labels(self) -> list[str]:
        """Labels of every look that counts as a miss."""
        return [j.look.label for j in self.judgements if j.constraining]

    @property
    def not_constraining(self) -> list[dict[str, Any]]:
        """Records of the looks that could not have seen the signal."""
        return [j.record() for j in self.judgements if not j.constraining]

    def details(self) -> dict[str, Any]:
        """``missed`` (labels), ``missed_sessions`` and ``not_constraining`` for a result."""
        return {
            "missed": self.labels,
            "missed_sessions": self.sessions,
            "misses": [j.record() for j in self.judgements if j.constraining],
            "not_constraining": self.not_constraining,
        }

    def summary(self) -> str:
        """A clause for a check's reason about the looks that did not count."""
        skipped = [j for j in self.judgements if not j.constraining]
        if not skipped:
            return ""

        def count(reason: str) -> int:
            return sum(1 for j in skipped if any(r.startswith(reason) for r in j.reasons))

        wording = (
            (BELOW_HORIZON, "with the target below the site's horizon limit"),
            (BELOW_THRESHOLD, "where the expected SNR was below the look's threshold"),
            (POINTED_ELSEWHERE, "pointed away from the target"),
        )
        parts = [f"{count(key)} {text}" for key, text in wording if count(key)]
        return (
            f" {len(skipped)} look(s) that saw nothing do not count ({', '.join(parts)}; "
            "numbers in the details)."
        )


def judge_all(
    context: CandidateView, looks: list[Look], max_pointing_offset_deg: float | None = None
) -> Misses:
    """Every look judged, in order."""
    return Misses(tuple(judge(context, look, max_pointing_offset_deg) for look in looks))
