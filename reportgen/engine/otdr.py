"""OTDR results: distances from time, a→b and b→a events paired and averaged, each event judged,
each loss re-measured from the trace by least squares, the length cross-checked.

Pure: no I/O, no words. Every number's basis is stated beside it; the input contract is
docs/project-format.md §12.
"""
from __future__ import annotations

import dataclasses
import math
from collections import defaultdict
from collections.abc import Sequence
from dataclasses import dataclass
from typing import Final

import numpy as np

from reportgen.engine.judge import Judgement
from reportgen.model import (
    Direction,
    FiberCategory,
    Link,
    OtdrEvent,
    OtdrEventKind,
    OtdrSettings,
    OtdrTrace,
    Polish,
    Project,
)
from reportgen.units import SPEED_OF_LIGHT_M_PER_S, TOLERANCE_DB, distance_from_time

__all__ = ["SPEED_OF_LIGHT_M_PER_S", "distance_from_time", "assess_otdr"]

# Pairing tolerance: PAIR_BASE_M + the pulse's length in the fiber, c·τ/(2·n_g). Two events one
# pulse length apart cannot be told apart by the instrument (the event dead zone is about one
# pulse length: common practice), and PAIR_BASE_M covers the sampling and the cords' length
# uncertainty (our choice). testing.otdr.pair_tolerance_m replaces the whole formula.
PAIR_BASE_M: Final = 5.0
DEFAULT_PULSE_NS: Final = 100.0  # when neither file nor row gives one (common practice for a few km)
DEFAULT_GROUP_INDEX: Final = 1.4680  # when neither file nor row gives one (SR-4731's default, from memory)

# Reflectance limits by fiber category and polish [dB] (an event reflecting more fails):
# TIA-568.3-D, optical fiber connector return loss: multimode ≥ 20 dB, single-mode ≥ 35 dB,
# single-mode for broadband analog video ≥ 55 dB, the grade APC connectors are made for
# (from memory: the document was not at hand; stated as it is remembered). No public
# reproduction of these clauses (TIA-568.3-D, ISO/IEC 14763-3, IEC 61753 connector grades) was
# found to check them against (2026-12-03): they stay "from memory" until one is. For scale, a
# flat glass/air end reflects about −14.7 dB (Fresnel, n = 1.45), far above every limit here.
REFLECTANCE_LIMIT_DB: Final = {
    (FiberCategory.MULTIMODE, Polish.UPC): -20.0,
    (FiberCategory.MULTIMODE, Polish.APC): -20.0,
    (FiberCategory.SINGLEMODE, Polish.UPC): -35.0,
    (FiberCategory.SINGLEMODE, Polish.APC): -55.0,
}
REFLECTANCE_SOURCE: Final = ("TIA-568.3-D connector return loss: multimode 20 dB, single-mode 35 dB, "
                             "55 dB for APC (from memory)")

# Least-squares re-measurement: the lines are fitted over at most LSA_WINDOW_M of trace on each
# side, starting LSA_GAP_PULSES pulse lengths (plus LSA_GAP_POINTS points) away from the event so
# the pulse's own smear is left out, and need LSA_MIN_POINTS points a side (our choice).
LSA_WINDOW_M: Final = 300.0
LSA_GAP_PULSES: Final = 1.5
LSA_GAP_POINTS: Final = 3
LSA_MIN_POINTS: Final = 8

# Length cross-check: the fiber measured by the OTDR may exceed the documented cable length
# by the fiber's excess length in a loose-tube cable (helix, about 0.5 to 2 %) and by slack
# loops: testing.otdr.length_tolerance_pct of the documented length (default 3 %, common
# practice), but never less than the pairing tolerance (the instrument's resolution).

# OTDR end-to-end loss against the insertion-loss result of the same strand and wavelength
# (mean of the judged results): both measure the same link, but the OTDR reads the end
# connections from backscatter and the meter from a reference; a difference beyond
# IL_AGREEMENT_DB is a finding (our choice, from memory of field practice: a few tenths of a dB;
# no published tolerance for this comparison was found, 2026-12-03).
IL_AGREEMENT_DB: Final = 0.5

JUDGED_AS_CONNECTION: Final = frozenset({OtdrEventKind.CONNECTOR, OtdrEventKind.REFLECTIVE})
JUDGED_AS_SPLICE: Final = frozenset({OtdrEventKind.SPLICE, OtdrEventKind.BEND, OtdrEventKind.OTHER})


def fresnel_reflectance_db(n_glass: float, n_other: float = 1.0) -> float:
    """Reflectance of a flat end at normal incidence, 10·log10(((n1−n2)/(n1+n2))²) [dB]."""
    ratio = ((n_glass - n_other) / (n_glass + n_other)) ** 2
    return 10.0 * math.log10(ratio)


def pulse_length_m(pulse_ns: float, group_index: float) -> float:
    """Length of fiber one pulse spans as the OTDR sees it: c·τ/(2·n_g) [m]."""
    return distance_from_time(pulse_ns * 1e-9, group_index)


def pair_tolerance_m(pulse_ns: float | None, group_index: float | None,
                     settings: OtdrSettings) -> float:
    """How far apart [m] an a→b and a mirrored b→a event may be and still be one event."""
    if settings.pair_tolerance_m is not None:
        return settings.pair_tolerance_m
    return PAIR_BASE_M + pulse_length_m(pulse_ns or DEFAULT_PULSE_NS, group_index or DEFAULT_GROUP_INDEX)


def bidirectional_average(loss_ab_db: float, loss_ba_db: float) -> float:
    """The event's loss: the mean of the two one-way losses (cancels the difference in
    backscatter of the fibers on either side, which shows as a gain one way, a loss the other)."""
    return (loss_ab_db + loss_ba_db) / 2.0


def lsa_event_loss(samples_db: np.ndarray, spacing_m: float, position_m: float, *,
                   gap_m: float, before_from_m: float, after_to_m: float) -> float | None:
    """An event's loss re-measured from the trace: least-squares lines fitted to the backscatter
    before the event (``before_from_m`` to ``position − gap``) and after it (``position + gap``
    to ``after_to_m``), both extrapolated to the event; the loss is the step between them.

    None when a side has fewer than LSA_MIN_POINTS points.
    """
    if samples_db is None or spacing_m <= 0 or len(samples_db) == 0:
        return None
    count = len(samples_db)
    gap = max(gap_m, LSA_GAP_POINTS * spacing_m)
    lo = max(before_from_m, position_m - gap - LSA_WINDOW_M)
    hi = min(after_to_m, position_m + gap + LSA_WINDOW_M)
    first = max(0, math.ceil(lo / spacing_m))
    last_before = min(count, math.floor((position_m - gap) / spacing_m) + 1)
    first_after = max(0, math.ceil((position_m + gap) / spacing_m))
    last = min(count, math.floor(hi / spacing_m) + 1)
    if last_before - first < LSA_MIN_POINTS or last - first_after < LSA_MIN_POINTS:
        return None
    before_x = np.arange(first, last_before) * spacing_m
    after_x = np.arange(first_after, last) * spacing_m
    slope_b, icpt_b = np.polyfit(before_x, samples_db[first:last_before], 1)
    slope_a, icpt_a = np.polyfit(after_x, samples_db[first_after:last], 1)
    return float((slope_b * position_m + icpt_b) - (slope_a * position_m + icpt_a))


# ------------------------------------------------------------------ the assessment


@dataclass(frozen=True)
class PairedEvent:
    position_m: float  # along the link from end A (negative: in the launch cord at A)
    kind: OtdrEventKind
    loss_ab_db: float | None
    loss_ba_db: float | None
    loss_avg_db: float | None  # the two-way mean; the one-way loss when only one was measured
    reflectance_db: float | None  # the worse (higher) of the two directions
    allowance_db: float | None  # None: not judged
    reflectance_limit_db: float | None
    verdict: str  # "pass", "fail" or "not-judged"
    flags: tuple[str, ...] = ()
    lsa_ab_db: float | None = None
    lsa_ba_db: float | None = None
    failed_on: tuple[str, ...] = ()  # why the verdict is "fail": "loss", "reflectance" or both


@dataclass(frozen=True)
class StrandOtdr:
    link_id: str
    strand: int
    wavelength_nm: int
    traces: tuple[OtdrTrace, ...]  # a→b first
    events: tuple[PairedEvent, ...]
    length_m: float | None  # fiber length of the link measured (cords taken off)
    documented_length_m: float
    length_tolerance_m: float
    end_to_end_loss_db: float | None  # the instruments' end-to-end loss, mean of both directions
    pair_tolerance_m: float
    verdict: str  # "pass" or "fail"
    findings: tuple[str, ...]  # "length-differs", "connection-count", "splice-count", "il-differs"
    insertion_loss_db: float | None = None  # mean judged insertion loss, same strand and wavelength
    # what the checks compared (the audit findings word them; reportgen.engine.findings_otdr)
    connections_found: int = 0
    connections_expected: int = 0
    splices_found: int = 0
    splices_expected: int = 0
    lsa_threshold_db: float = OtdrSettings.lsa_threshold_db  # used for the "lsa-differs" flag
    il_agreement_db: float = IL_AGREEMENT_DB  # used for "il-differs"


@dataclass(frozen=True)
class OtdrAssessment:
    strands: tuple[StrandOtdr, ...]

    def for_link(self, link_id: str) -> tuple[StrandOtdr, ...]:
        return tuple(s for s in self.strands if s.link_id == link_id)


def assess_otdr(project: Project, judgement: Judgement | None = None) -> OtdrAssessment:
    """Every OTDR strand and wavelength of the project, in links.csv order.

    With ``judgement`` the OTDR end-to-end loss is compared with the insertion-loss results.
    """
    settings = getattr(project.testing, "otdr", None) or OtdrSettings()
    groups: dict[tuple[str, int, int], list[OtdrTrace]] = defaultdict(list)
    for trace in getattr(project, "otdr", ()):
        groups[(trace.link_id, trace.strand, trace.wavelength_nm)].append(trace)
    insertion_loss = _insertion_losses(judgement)
    strands = []
    for link in project.links:
        for key in sorted(k for k in groups if k[0] == link.link_id):
            strand = assess_strand(link, groups[key], settings,
                                   project.limits.connection_db, project.limits.splice_db)
            il = insertion_loss.get(key)
            if il is not None and strand.end_to_end_loss_db is not None:
                strand = dataclasses.replace(strand, insertion_loss_db=il)
                if abs(strand.end_to_end_loss_db - il) > IL_AGREEMENT_DB + TOLERANCE_DB:
                    strand = dataclasses.replace(strand, findings=(*strand.findings, "il-differs"))
            strands.append(strand)
    return OtdrAssessment(tuple(strands))


def _insertion_losses(judgement: Judgement | None) -> dict[tuple[str, int, int], float]:
    """Mean judged insertion loss per (link, strand, wavelength)."""
    if judgement is None or judgement.results.empty:
        return {}
    frame = judgement.results
    judged = frame[frame["judged"].astype(bool)]
    means = judged.groupby(["link_id", "strand", "wavelength_nm"])["loss_db"].mean()
    return {(str(k[0]), int(k[1]), int(k[2])): float(v) for k, v in means.items()}


def _cords(trace: OtdrTrace, settings: OtdrSettings) -> tuple[float, float]:
    launch = trace.launch_cord_m if trace.launch_cord_m is not None else settings.launch_cord_m
    receive = trace.receive_cord_m if trace.receive_cord_m is not None else settings.receive_cord_m
    return launch, receive


def _fiber_length(trace: OtdrTrace, settings: OtdrSettings) -> float | None:
    ends = [e.position_m for e in trace.events if e.kind is OtdrEventKind.END]
    if not ends:
        return None
    launch, receive = _cords(trace, settings)
    return max(ends) - launch - receive


def assess_strand(link: Link, traces: Sequence[OtdrTrace], settings: OtdrSettings,
                  connection_db: float, splice_db: float) -> StrandOtdr:
    """Pair, average and judge the events of one strand at one wavelength."""
    by_direction = {t.direction: t for t in traces}  # the loader allows one per direction
    ab, ba = by_direction.get(Direction.AB), by_direction.get(Direction.BA)
    first = ab or ba
    assert first is not None
    lengths = [x for x in (_fiber_length(t, settings) for t in (ab, ba) if t) if x is not None]
    length = sum(lengths) / len(lengths) if lengths else None
    span = length if length is not None else link.length_m
    tolerance = pair_tolerance_m(first.pulse_ns, first.group_index, settings)

    def along(trace: OtdrTrace) -> list[tuple[float, OtdrEvent]]:
        launch, _ = _cords(trace, settings)
        if trace.direction is Direction.AB:
            return [(e.position_m - launch, e) for e in trace.events]
        return [(span - (e.position_m - launch), e) for e in trace.events]

    ab_events = along(ab) if ab else []
    ba_events = along(ba) if ba else []
    pairs: list[tuple[tuple[float, OtdrEvent] | None, tuple[float, OtdrEvent] | None]] = []
    used: set[int] = set()
    for x_ab, ev_ab in ab_events:
        best, best_d = None, tolerance + 1e-9
        for i, (x_ba, ev_ba) in enumerate(ba_events):
            if i in used or _end_like(ev_ab) != _end_like(ev_ba):
                continue
            if abs(x_ba - x_ab) <= best_d:
                best, best_d = i, abs(x_ba - x_ab)
        if best is None:
            pairs.append(((x_ab, ev_ab), None))
        else:
            used.add(best)
            pairs.append(((x_ab, ev_ab), ba_events[best]))
    pairs += [(None, item) for i, item in enumerate(ba_events) if i not in used]
    pairs.sort(key=lambda p: (p[0] or p[1])[0])  # type: ignore[index]

    conn_allow = settings.connection_db if settings.connection_db is not None else connection_db
    splice_allow = settings.splice_db if settings.splice_db is not None else splice_db
    refl_limit = (settings.reflectance_db if settings.reflectance_db is not None
                  else REFLECTANCE_LIMIT_DB[(link.fiber_type.category, settings.polish)])
    events = []
    for one_ab, one_ba in pairs:
        x = _mean([p[0] for p in (one_ab, one_ba) if p])
        kind = _kind(one_ab[1] if one_ab else None, one_ba[1] if one_ba else None)
        loss_ab = one_ab[1].loss_db if one_ab else None
        loss_ba = one_ba[1].loss_db if one_ba else None
        flags: list[str] = []
        if loss_ab is not None and loss_ba is not None:
            avg = bidirectional_average(loss_ab, loss_ba)
            if avg < -TOLERANCE_DB:
                flags.append("negative-average")
        else:
            avg = loss_ab if loss_ab is not None else loss_ba
            flags.append("one-way")
        # a launch seen from one end is the other end's fiber end: show its own direction's value
        refls = [p[1].reflectance_db for p in (one_ab, one_ba) if p and p[1].reflectance_db is not None
                 and (not _end_like(p[1]) or p[1].kind is kind)]
        reflectance = max(refls) if refls else None
        inside = -tolerance <= x <= span + tolerance
        allowance = None
        limit = None
        failed_on: tuple[str, ...] = ()
        if kind in (OtdrEventKind.LAUNCH, OtdrEventKind.END) or not inside:
            verdict = "not-judged"
            if not inside and kind not in (OtdrEventKind.LAUNCH, OtdrEventKind.END):
                flags.append("in-cord")
        else:
            allowance = conn_allow if kind in JUDGED_AS_CONNECTION else splice_allow
            limit = refl_limit if kind in JUDGED_AS_CONNECTION else None
            loss_over = avg is not None and avg > allowance + TOLERANCE_DB
            reflects = limit is not None and reflectance is not None and reflectance > limit + TOLERANCE_DB
            failed_on = (("loss",) if loss_over else ()) + (("reflectance",) if reflects else ())
            verdict = "fail" if failed_on else "pass"
        lsa_ab = _lsa(ab, one_ab) if one_ab else None
        lsa_ba = _lsa(ba, one_ba) if one_ba else None
        for lsa, table in ((lsa_ab, loss_ab), (lsa_ba, loss_ba)):
            if lsa is not None and table is not None and abs(lsa - table) > settings.lsa_threshold_db + TOLERANCE_DB:
                flags.append("lsa-differs")
                break
        events.append(PairedEvent(position_m=x, kind=kind, loss_ab_db=loss_ab, loss_ba_db=loss_ba,
                                  loss_avg_db=avg, reflectance_db=reflectance, allowance_db=allowance,
                                  reflectance_limit_db=limit, verdict=verdict, flags=tuple(flags),
                                  lsa_ab_db=lsa_ab, lsa_ba_db=lsa_ba, failed_on=failed_on))

    findings = []
    length_tol = max(link.length_m * settings.length_tolerance_pct / 100.0, tolerance)
    if length is not None and abs(length - link.length_m) > length_tol:
        findings.append("length-differs")
    judged = [e for e in events if e.verdict != "not-judged"]
    # links.csv counts the connections inside the link; the two end connections are measured
    # too when a cord is there to show them (launch cord at the trace's start, receive at its end)
    cords = _cords(first, settings)
    expected_connections = link.connections + sum(1 for cord in cords if cord > 0)
    connections_found = sum(e.kind in JUDGED_AS_CONNECTION for e in judged)
    splices_found = sum(e.kind is OtdrEventKind.SPLICE for e in judged)
    if connections_found != expected_connections:
        findings.append("connection-count")
    if splices_found != link.splices:
        findings.append("splice-count")
    totals = [t.total_loss_db for t in (ab, ba) if t and t.total_loss_db is not None]
    end_to_end = _mean(totals) if totals else None
    verdict = "fail" if any(e.verdict == "fail" for e in events) else "pass"
    ordered = tuple(t for t in (ab, ba) if t)
    return StrandOtdr(link.link_id, first.strand, first.wavelength_nm, ordered, tuple(events), length,
                      link.length_m, length_tol, end_to_end, tolerance, verdict, tuple(findings),
                      connections_found=connections_found, connections_expected=expected_connections,
                      splices_found=splices_found, splices_expected=link.splices,
                      lsa_threshold_db=settings.lsa_threshold_db)


def _end_like(event: OtdrEvent) -> bool:
    return event.kind in (OtdrEventKind.LAUNCH, OtdrEventKind.END)


def _kind(ab: OtdrEvent | None, ba: OtdrEvent | None) -> OtdrEventKind:
    """The pair's kind: the a→b one, unless only b→a saw it; a launch seen from B is its end."""
    if ab is not None:
        return ab.kind
    assert ba is not None
    swap = {OtdrEventKind.LAUNCH: OtdrEventKind.END, OtdrEventKind.END: OtdrEventKind.LAUNCH}
    return swap.get(ba.kind, ba.kind)


def _mean(values: Sequence[float]) -> float:
    return sum(values) / len(values)


def _lsa(trace: OtdrTrace | None, item: tuple[float, OtdrEvent]) -> float | None:
    if trace is None or trace.samples_db is None or not trace.sample_spacing_m:
        return None
    event = item[1]
    if _end_like(event):
        return None
    positions = sorted(e.position_m for e in trace.events)
    before = [p for p in positions if p < event.position_m]
    after = [p for p in positions if p > event.position_m]
    pulse = pulse_length_m(trace.pulse_ns or DEFAULT_PULSE_NS, trace.group_index or DEFAULT_GROUP_INDEX)
    gap = LSA_GAP_PULSES * pulse
    return lsa_event_loss(np.asarray(trace.samples_db), trace.sample_spacing_m, event.position_m,
                          gap_m=gap,
                          before_from_m=(before[-1] + gap) if before else 0.0,
                          after_to_m=(after[0] - gap) if after else math.inf)
