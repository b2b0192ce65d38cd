"""Findings: what a report says about a model, as plain data.

A finding is made from a failed (or uncertain) verdict, or from a model that could not be
loaded. Reports render findings; they never look at matrices or verdicts themselves.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING, Any, Iterable, Protocol

if TYPE_CHECKING:  # pragma: no cover
    from ..errors import ModelError
    from ..model.core import Model
    from ..analysis.modes import Mode
    from .catalogue import Verdict

__all__ = ["Finding", "ModeRow", "Cause", "findings_of", "error_finding", "INVALID_RULE",
           "RulePolicy"]


class RulePolicy(Protocol):
    """What findings need of the repository policy (:class:`eigengate.scan.config.Config`)."""

    def rule_enabled(self, rule: str) -> bool: ...

    def severity_of(self, rule: str) -> str: ...

#: The note every report gives a finding whose value is within its error bound of the threshold.
UNCERTAIN_NOTE = "numerically uncertain: a value lies within its error bound of the threshold"

#: What each value of a finding's ``decided_by`` means, for the reports' notes.
DECIDED_NOTES = {
    "certified": "decided by enclosures that hold in exact arithmetic",
    "estimated": "decided by first-order error bounds",
    "uncertain": "not decided by the error bounds; the on_uncertain policy gave the outcome",
}

#: Rule of a model source that could not be loaded or analysed.
INVALID_RULE = ("EG001", "invalid-model")


@dataclass(frozen=True)
class ModeRow:
    """One offending mode as a report shows it."""

    index: int
    eigenvalue: complex
    s: complex
    pair: bool
    multiplicity: int
    defective: bool
    damping_ratio: float
    natural_frequency: float
    time_constant: float
    uncertainty: float
    condition: float
    top_states: tuple[tuple[str, float], ...]
    name: str = ""

    @classmethod
    def of(cls, mode: "Mode") -> "ModeRow":
        from ..analysis.naming import mode_name

        top = tuple(mode.top_states())
        return cls(index=mode.index, eigenvalue=mode.eigenvalue, s=mode.s, pair=mode.pair,
                   multiplicity=mode.multiplicity, defective=mode.defective,
                   damping_ratio=mode.damping_ratio, natural_frequency=mode.natural_frequency,
                   time_constant=mode.time_constant, uncertainty=mode.uncertainty,
                   condition=mode.condition, top_states=top, name=mode_name(top))


@dataclass(frozen=True)
class Cause:
    """One line of a regression's cause: an input that changed (``input`` with ``before`` →
    ``after``, its ``line`` in the model file, the referenced ``file`` it was read from) and,
    when it was ranked, its first-order ``shift`` of the regressed mode's eigenvalue and its
    ``share`` of the first-order total; or, with ``input`` empty, a note on the attribution
    (``text`` is always the sentence a report prints)."""

    text: str
    input: str = ""
    before: float | None = None
    after: float | None = None
    share: float | None = None
    shift: complex | None = None
    line: int | None = None
    file: str | None = None


@dataclass(frozen=True)
class Finding:
    """A problem to report: rule, place, requirement, measured value, margin, offending modes."""

    rule: str
    name: str
    severity: str  # "error" or "warning"
    source: str
    line: int | None
    model: str
    label: str | None
    message: str
    requirement: str = ""
    measured: float | str | None = None
    threshold: float | str | None = None
    margin: float | None = None
    unit: str = ""
    uncertain: bool = False
    modes: tuple[ModeRow, ...] = ()
    suggestion: str | None = None
    waived: str | None = None  # the waiver's reason, when a waiver accepts this finding
    #: The waiver that covers (or, expired, no longer covers) this finding: its expiry and
    #: where it is written, ``until 2027-03-31 (models/x.yaml:14)``; empty when none.
    waiver_note: str = ""
    #: Regressions: the offending modes as the baseline has them, aligned with ``modes``
    #: (a disappeared mode is in ``modes``, as the baseline has it, and ``before`` is empty).
    before: tuple[ModeRow, ...] = ()
    #: How the verdict was decided (``certified``, ``estimated``, ``uncertain``); empty for
    #: findings that come from no verdict (invalid models, waivers, regressions).
    decided_by: str = ""
    #: The robustness figure behind the verdict (:class:`~eigengate.rules.catalogue.Figure`)
    #: with its bracket, or None.
    figure: Any = None
    #: Regressions: which inputs changed and how much each moved the mode
    #: (:class:`Cause` records, the largest first); empty for every other finding.
    cause: tuple[Cause, ...] = ()

    @property
    def title(self) -> str:
        return self.model if self.label is None else f"{self.model}[{self.label}]"


def findings_of(model: "Model", verdicts: Iterable["Verdict"],
                config: RulePolicy | None = None) -> list[Finding]:
    """Findings for one analysed model: every failed verdict (severity from the configuration,
    ``error`` by default) and every verdict that passed only by the on_uncertain=pass policy
    (warning)."""
    out = []
    for v in verdicts:
        if v.passed and not v.uncertain:
            continue
        if config is not None and not config.rule_enabled(v.rule):
            continue
        severity = "warning" if v.passed else (
            "error" if config is None else config.severity_of(v.rule))
        key = v.requirement.split(":")[0]
        line = model.line_of(f"requirements.{key}") or model.line_of("requirements") \
            or model.line_of("plant.A")
        out.append(Finding(
            rule=v.rule, name=v.name, severity=severity,
            source=model.source, line=line, model=model.name, label=model.label,
            message=v.message, requirement=v.requirement, measured=v.measured,
            threshold=v.threshold, margin=v.margin, unit=v.unit, uncertain=v.uncertain,
            modes=tuple(ModeRow.of(m) for m in v.offending), suggestion=v.suggestion,
            decided_by=v.decided_by, figure=v.figure))
    return out


def error_finding(error: "ModelError", model: str = "", label: str | None = None) -> Finding:
    """A finding for a model source that could not be loaded or analysed."""
    return Finding(rule=INVALID_RULE[0], name=INVALID_RULE[1], severity="error",
                   source=error.source, line=error.line, model=model, label=label,
                   message=error.render(), requirement=error.field)


def count(findings: Iterable[Finding]) -> dict[str, int]:
    out = {"error": 0, "warning": 0}
    for f in findings:
        out[f.severity] += 1
    return out
