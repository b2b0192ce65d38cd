"""Rule identities and the verdict record every requirement returns.

Rule ids are stable: reports, configuration (select, ignore, severity) and waivers name them.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING

from .equilibrium import EQUILIBRIUM_TYPES

if TYPE_CHECKING:  # pragma: no cover
    from .modes import Mode

__all__ = ["Rule", "RULES", "Verdict", "rule_by_key"]


@dataclass(frozen=True, eq=False)
class Verdict:
    """Outcome of one requirement on one model (and operating point)."""

    rule: str
    name: str
    requirement: str
    passed: bool
    uncertain: bool
    measured: float | str
    threshold: float | str
    margin: float | None
    unit: str
    offending: tuple["Mode", ...]
    message: str
    suggestion: str | None = None


@dataclass(frozen=True)
class Rule:
    """Stable identity of a requirement: id, name, file key, units and what it checks."""

    id: str
    name: str
    key: str
    unit: str
    summary: str


RULES: dict[str, Rule] = {r.id: r for r in (
    Rule("EG101", "asymptotic-stability", "stable", "1/s",
         "Every mode decays: Re(s) < 0 (Hurwitz) or |z| < 1 (Schur). `stable: marginal` also "
         "accepts simple eigenvalues on the boundary; defective ones (Jordan blocks) always fail."),
    Rule("EG102", "decay-rate", "min_decay_rate", "1/s",
         "Every mode decays at least like exp(-αt): -Re(s) ≥ α (discrete: |z| ≤ exp(-αT))."),
    Rule("EG103", "damping-ratio", "min_damping", "",
         "Every oscillatory mode has damping ratio ζ = -Re(s)/|s| ≥ ζmin."),
    Rule("EG104", "natural-frequency", "max_frequency", "rad/s",
         "Every mode has natural frequency ωn = |s| ≤ ωmax (deadbeat z = 0 modes excepted)."),
    Rule("EG105", "pole-region", "pole_region", "rad/s",
         "Every pole lies in the region given by min_decay_rate, min_damping and max_frequency; "
         "the margin is the s-plane distance to the region's boundary."),
    Rule("EG106", "equilibrium-type", "equilibrium",
         "", "The origin has the expected type: " + ", ".join(EQUILIBRIUM_TYPES) + "."),
    Rule("EG107", "no-saddle", "no_saddle", "",
         "The origin is not a saddle: not both stable and unstable directions."),
    Rule("EG108", "direction-counts", "directions", "",
         "The numbers of stable, unstable and center directions are as stated."),
    Rule("EG001", "invalid-model", "", "",
         "The model file could not be read, or a field is malformed; the message names the "
         "file, the field, what was found and what was expected."),
    Rule("EG002", "expired-waiver", "waivers", "",
         "A waiver's expiry date has passed: it no longer waives anything, and the finding it "
         "covered is reported again."),
    Rule("EG003", "unused-waiver", "waivers", "",
         "A waiver matched no finding: the problem it was written for is gone, or the waiver "
         "names the wrong rule, model or operating point."),
    Rule("EG109", "known-modes", "known_modes", "",
         "Every declared known mode (integrator, rigid-body mode, conserved quantity) is present "
         "exactly as declared; known modes are left out of every other requirement."),
)}




def rule_by_key(key: str) -> Rule:
    """The rule whose model-file key is ``key`` (``"min_damping"`` → EG103)."""
    for rule in RULES.values():
        if rule.key == key:
            return rule
    raise KeyError(key)


_EXAMPLES = {
    "EG101": "requirements:\n  stable: true        # or: stable: marginal",
    "EG102": "requirements:\n  min_decay_rate: 0.5  # 1/s: every mode decays at least like e^(-0.5 t)",
    "EG103": "requirements:\n  min_damping: 0.3",
    "EG104": "requirements:\n  max_frequency: 120   # rad/s",
    "EG105": "requirements:\n  pole_region: {min_decay_rate: 0.5, min_damping: 0.4, "
             "max_frequency: 120}",
    "EG106": "requirements:\n  equilibrium: stable-node",
    "EG107": "requirements:\n  no_saddle: true",
    "EG108": "requirements:\n  directions: {stable: 4, unstable: 0, center: 0}",
    "EG109": "known_modes:\n  - {eigenvalue: 0, count: 2, reason: rigid-body translation}",
    "EG002": "waivers:\n  - {rule: EG103, reason: 'retune in review', expires: 2027-03-31}",
    "EG003": "waivers:\n  - {rule: EG103, reason: 'retune in review'}",
    "EG001": "model_format: 1\nplant:\n  A: [[-1.0]]",
}


def explain_rule(rule: Rule) -> str:
    """A rule's id, name, file key, unit, description and an example."""
    lines = [f"{rule.id} {rule.name}", "", rule.summary, ""]
    if rule.key:
        lines.append(f"model-file key: {rule.key}" + (f" (unit: {rule.unit})" if rule.unit else ""))
    lines += ["", "example:", *("  " + x for x in _EXAMPLES.get(rule.id, "").splitlines()), "",
              "A failing rule is an error by default; [tool.eigengate.severity] can make it a "
              "warning or switch it off, and a waiver (with a reason) can accept one finding."]
    return "\n".join(lines)
