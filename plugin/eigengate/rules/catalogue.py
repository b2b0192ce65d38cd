"""Rule identities and the verdict record every requirement returns.

Rule ids are stable: reports, configuration (select, ignore, severity) and waivers name them.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING

from ..analysis.equilibrium import EQUILIBRIUM_TYPES

if TYPE_CHECKING:  # pragma: no cover
    from ..analysis.modes import Mode

__all__ = ["Rule", "RULES", "Verdict", "make_verdict", "Figure", "rule_by_key", "DECIDED_BY"]

#: How a verdict was decided: by a certified enclosure, by the first-order estimate, or not.
DECIDED_BY = ("certified", "estimated", "uncertain")


@dataclass(frozen=True, eq=False)
class Verdict:
    """Outcome of one requirement on one model (and operating point).

    ``decided_by`` says what decided the outcome (:data:`DECIDED_BY`): ``certified`` when
    enclosures that hold in exact arithmetic decide it, ``estimated`` when only the
    first-order error bounds do (the default of verdicts that do not say), ``uncertain``
    when neither does and the on_uncertain policy gave the outcome.
    """

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
    decided_by: str = ""
    #: A robustness figure behind the verdict (:class:`Figure`), for the reports and the
    #: baseline; None for the eigenvalue and margin rules.
    figure: "Figure | None" = None

    def __post_init__(self) -> None:
        if not self.decided_by:
            object.__setattr__(self, "decided_by", "uncertain" if self.uncertain else "estimated")


def make_verdict(rule: str, name: str, requirement: str, passed: bool, uncertain: bool,
                 measured: "float | str", threshold: "float | str", margin: "float | None",
                 unit: str, offending: tuple, message: str, suggestion: "str | None" = None,
                 decided_by: str = "", figure: "Figure | None" = None) -> Verdict:
    """``Verdict(...)`` with the same arguments, filled in directly rather than through the
    frozen ``__init__`` (one ``object.__setattr__`` per field): the same instance, the
    fields in the same order, ``__post_init__``'s default of ``decided_by`` included."""
    v = object.__new__(Verdict)
    v.__dict__.update(
        rule=rule, name=name, requirement=requirement, passed=passed, uncertain=uncertain,
        measured=measured, threshold=threshold, margin=margin, unit=unit, offending=offending,
        message=message, suggestion=suggestion,
        decided_by=decided_by or ("uncertain" if uncertain else "estimated"), figure=figure)
    return v


@dataclass(frozen=True)
class Figure:
    """A robustness figure with its bracket: the true value lies in ``[lower, upper]`` (up to
    the rounding of the last few digits, which the bracket already includes).

    ``name`` is the baseline key (``stability_radius``, ``transient_growth``,
    ``pseudospectral_abscissa``); ``at`` is where the extreme value is attained (a frequency
    in rad/s, a time in s or a step count, a point of the complex plane as ``[re, im]``,
    parameter values), described by ``at_label``; ``method`` names the algorithm; ``notes``
    lists what is proven and what is sampled. ``curve`` and ``grid`` hold plot data the
    analysis made, or are empty: ``curve`` pairs of numbers (``(t, ‖e^{At}‖)``), ``grid`` a
    σ_min grid for pseudospectral level curves (first row the x values, second the y values,
    then one row of σ_min(A − (x+iy)I) per y).
    """

    name: str
    value: float
    lower: float
    upper: float
    unit: str = ""
    at: tuple[float, ...] = ()
    at_label: str = ""
    method: str = ""
    notes: tuple[str, ...] = ()
    curve: tuple[tuple[float, float], ...] = ()
    grid: tuple[tuple[float, ...], ...] = ()


@dataclass(frozen=True)
class Rule:
    """Stable identity of a requirement: id, name, file key, units and what it checks."""

    id: str
    name: str
    key: str
    unit: str
    summary: str
    severity: str = "error"  # the default; [tool.eigengate.severity] changes it


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
    Rule("EG004", "unselected-model-file", "include", "",
         "A file declares model_format but the include patterns do not select it, so it is "
         "never checked; the message gives a pattern that would select it (add it to include, "
         "or the file to exclude to leave it out on purpose).", severity="warning"),
    Rule("EG005", "no-requirement", "requirements", "",
         "No requirement applies to the model (none in the file, none from the policy), so "
         "nothing was checked: it is reported instead of passing."),
    Rule("EG006", "expiring-waiver", "waivers", "",
         "A waiver expires soon (within waiver_warning_days of the policy, 30 days unless "
         "set): review the finding it covers before the check starts failing on it again.",
         severity="warning"),
    Rule("EG109", "known-modes", "known_modes", "",
         "Every declared known mode (integrator, rigid-body mode, conserved quantity) is present "
         "exactly as declared; known modes are left out of every other requirement."),
    # Robustness beyond the eigenvalues (eigengate.analysis.robustness, .parametric;
    # eigengate.rules.robustness, .robust_range).
    Rule("EG110", "stability-radius", "min_stability_radius", "",
         "The distance to instability r = min over ω of σ_min(A − iωI) (discrete: over θ of "
         "σ_min(A − e^{iθ}I)) is at least R: no complex perturbation of A smaller than r in "
         "the 2-norm makes the model unstable. With structure {B, C} it is the radius for "
         "perturbations A + BΔC, 1/‖C(sI − A)⁻¹B‖∞, and with real: true the radius for real "
         "Δ. Computed by the Hamiltonian level-set method (a bracket, not a grid)."),
    Rule("EG111", "transient-growth", "max_transient_growth", "",
         "The largest amplification of any initial state, max over t ≥ 0 of ‖e^{At}‖₂ "
         "(discrete: over k of ‖A^k‖₂), is at most G; the peak and its time come with an "
         "upper bound, and the verdict is uncertain when the two straddle G."),
    Rule("EG112", "pseudospectral-abscissa", "max_pseudospectral_abscissa", "1/s",
         "The ε-pseudospectral abscissa, the largest Re z with σ_min(A − zI) ≤ ε (discrete: "
         "the pseudospectral radius, largest |z|), is at most the given value: every "
         "perturbation of norm below ε leaves the poles left of it. Criss-cross algorithm."),
    Rule("EG113", "robust-over-range", "robust", "",
         "The listed linear requirements hold for every value of the declared uncertain "
         "parameters in their ranges; one parameter is decided exactly from the stability "
         "boundary (guardian map), several on the vertices and edges exactly and inside "
         "the box by sampling and local optimisation, which the finding says."),
    # Loop margins (eigengate.analysis.margins, eigengate.rules.loop_requirements): need a feedback block.
    Rule("EG301", "gain-margin", "min_gain_margin_db", "dB",
         "The loop, broken at the plant input (or output), tolerates a gain increase and, where "
         "the loop is only stable above some gain, a decrease of at least this many dB; "
         "MIMO loops are checked one channel at a time, the others closed."),
    Rule("EG302", "phase-margin", "min_phase_margin_deg", "deg",
         "At every gain crossover |L(jω)| = 1 the phase is at least this far from -180°."),
    Rule("EG303", "delay-margin", "min_delay_margin", "s",
         "The loop tolerates a pure delay of at least this many seconds: the least PM_i/ω_i "
         "over every gain crossover."),
    Rule("EG304", "sensitivity-peak", "max_sensitivity_peak", "",
         "The sensitivity peak Ms = max over ω of σ̄((I + L)⁻¹) is at most this value."),
    Rule("EG305", "disk-margin", "min_disk_margin", "",
         "The balanced disk margin α = 2 / max over ω of σ̄(S − T) (all channels at once) is "
         "at least this value: gains in [(1−α/2)/(1+α/2), (1+α/2)/(1−α/2)] and phases within "
         "±2·atan(α/2) are tolerated."),
    # Equilibria of nonlinear models (eigengate.analysis.nonlinear): need a vector_field block.
    Rule("EG401", "no-saddle-in-box", "no_saddle_in_box", "",
         "No equilibrium found in the declared box is a saddle."),
    Rule("EG402", "equilibrium-at", "equilibrium_at", "",
         "Each listed point is an equilibrium (|f(x, u)| within the tolerance) of the listed "
         "type."),
    Rule("EG403", "equilibrium-count", "equilibrium_count", "",
         "The declared box holds exactly this many distinct equilibria."),
    Rule("EG404", "equilibria-stable", "equilibria_stable", "",
         "Every equilibrium found in the box is asymptotically stable (hyperbolic, no unstable "
         "direction)."),
    # Regressions against the accepted baseline (eigengate.baseline.regressions); the key is the
    # tolerance block that tunes them.
    Rule("EG201", "crossed-into-instability", "allowed_drift", "1/s",
         "A mode that was stable (or on the boundary) in the baseline is now unstable, or an "
         "unstable mode appeared with no counterpart in the baseline."),
    Rule("EG202", "decay-rate-regressed", "allowed_drift", "1/s",
         "A mode decays more slowly than in the baseline (-Re s dropped by more than the "
         "tolerance), or the slowest decay rate of the model did."),
    Rule("EG203", "damping-regressed", "allowed_drift", "",
         "An oscillatory mode is less damped than in the baseline (ζ dropped by more than the "
         "tolerance), or the smallest damping ratio of the model did."),
    Rule("EG204", "equilibrium-type-changed", "allowed_drift", "",
         "The equilibrium type or its unstable/center direction counts changed for the worse "
         "since the baseline (for example a saddle appeared)."),
    Rule("EG205", "frequency-shifted", "allowed_drift", "rad/s",
         "An oscillatory mode's natural frequency ωn moved by more than the tolerance."),
    Rule("EG206", "mode-appeared", "allowed_drift", "",
         "A mode has no counterpart in the baseline (the model order grew, or a mode moved "
         "beyond the matching gate)."),
    Rule("EG207", "mode-disappeared", "allowed_drift", "",
         "A baseline mode has no counterpart in the model (the model order shrank, or a mode "
         "moved beyond the matching gate)."),
    Rule("EG211", "stability-radius-shrank", "allowed_drift", "",
         "The model's distance to instability (EG110's figure) shrank by more than the "
         "tolerance since the baseline."),
    Rule("EG212", "transient-growth-rose", "allowed_drift", "",
         "The model's transient peak max ‖e^{At}‖ (EG111's figure) rose by more than the "
         "tolerance since the baseline."),
    Rule("EG213", "pseudospectral-abscissa-rose", "allowed_drift", "1/s",
         "The model's ε-pseudospectral abscissa (EG112's figure) moved right by more than "
         "the tolerance since the baseline."),
    Rule("EG208", "new-model", "", "",
         "The model has no baseline entry yet: nothing to compare with until it is accepted."),
    Rule("EG209", "stale-baseline-entry", "", "",
         "A baseline entry names a model that no longer exists (file deleted or renamed, "
         "operating point removed); accepting again removes it."),
    Rule("EG210", "baseline-unreadable", "", "",
         "The model file could not be loaded where the baseline comes from (the git revision "
         "of --against), so its models were not compared; the finding says why."),
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
    "EG004": "[tool.eigengate]\ninclude = [\"models/**/*.yaml\", \"models/**/*.yml\"]",
    "EG006": "waivers:\n  - {rule: EG103, reason: 'retune in review', expires: 2027-06-30}",
    "EG005": "requirements:\n  stable: true   # or [tool.eigengate.requirements] for every model",
    "EG001": "model_format: 1\nplant:\n  A: [[-1.0]]",
    "EG110": "requirements:\n  min_stability_radius: 0.05\n  # or {min: 0.05, structure: {B: [[...]], C: [[...]]}, real: true}",
    "EG111": "requirements:\n  max_transient_growth: 10",
    "EG112": "requirements:\n  max_pseudospectral_abscissa: {epsilon: 0.01, max: -0.1}",
    "EG113": "parameters:\n  damper_gain: {nominal: 2.4, range: [2.0, 2.8],\n"
             "                affects: {feedback.state_gain: [[0.0, 1.0, 0.0]]}}\n"
             "requirements:\n  robust: {stable: true, min_damping: 0.2}",
    "EG301": "loop: {at: plant_input}\nrequirements:\n  min_gain_margin_db: 6",
    "EG302": "requirements:\n  min_phase_margin_deg: 45",
    "EG303": "requirements:\n  min_delay_margin: 0.05   # s",
    "EG304": "requirements:\n  max_sensitivity_peak: 2.0",
    "EG305": "requirements:\n  min_disk_margin: 0.5",
    "EG401": "requirements:\n  no_saddle_in_box: true",
    "EG402": "requirements:\n  equilibrium_at: {x: [0.0, 0.0], type: stable-focus}",
    "EG403": "requirements:\n  equilibrium_count: 3",
    "EG404": "requirements:\n  equilibria_stable: true",
    **{rid: "allowed_drift:      # [tool.eigengate.allowed_drift] or a model file's own\n"
            "  decay_rate: {abs: 1.0e-6, rel: 0.05}\n  damping: {abs: 0.005, rel: 0.05}\n"
            "  frequency: {rel: 0.05}"
       for rid in ("EG201", "EG202", "EG203", "EG204", "EG205", "EG206", "EG207")},
    **{rid: "allowed_drift:\n  stability_radius: {rel: 0.05}\n  transient_growth: {rel: 0.05}\n"
            "  pseudospectral_abscissa: {abs: 0.01}" for rid in ("EG211", "EG212", "EG213")},
}


#: What a robustness figure means for a practitioner, and where it stops meaning it.
_MEANING = {
    "EG110": (
        "what it means: the smallest perturbation of A (2-norm) that moves a pole onto the "
        "stability boundary; a radius small against the size of A says the model is one small "
        "modelling error from unstable, even when every pole sits well inside.",
        "limits: it depends on the state coordinates (the same transfer function in another "
        "realisation has another radius), so compare it across retunes of one model, not "
        "across models; the complex radius allows complex Δ, which real plants never have, "
        "so it is a lower bound of the real radius (real: true), whose frequency search is "
        "sampled; structure {B, C} scales with B and C."),
    "EG111": (
        "what it means: the worst amplification of any initial state before it decays; a "
        "peak of 100 means some disturbance grows a hundredfold first, which saturates "
        "actuators or leaves the region the linearisation holds in, although every pole is "
        "stable.",
        "limits: it measures the 2-norm of the state in the model's own coordinates (scale "
        "the states to meaningful units first); it says nothing about inputs, and it is "
        "infinite for a model that is not asymptotically stable."),
    "EG112": (
        "what it means: how far right the poles can go under any perturbation of norm ε; "
        "negative means every such perturbation leaves the model stable, and its gap to the "
        "spectral abscissa shows how sensitive the poles are.",
        "limits: ε is in the units of A's entries and the figure depends on the state "
        "coordinates like the radius; the criss-cross iteration finds a local maximum "
        "first, and the bracket's upper bound comes from a vertical line test that holds up "
        "to the rounding of the Hamiltonian eigenvalues."),
    "EG113": (
        "what it means: the stated requirements hold for every parameter value in its "
        "range, not only at the nominal one.",
        "limits: one parameter is decided exactly; with several, only the vertices and "
        "edges are exact and the inside of the box is sampled and locally optimised (the "
        "finding says so), so a very narrow bad region inside the box can be missed."),
}
_MEANING.update({rid: _MEANING[base] for rid, base in (("EG211", "EG110"), ("EG212", "EG111"),
                                                       ("EG213", "EG112"))})


#: Keys of the repository policy alone (no model file has them).
_POLICY_ONLY_KEYS = frozenset({"include"})


def explain_rule(rule: Rule) -> str:
    """A rule's id, name, file key, unit, description and an example."""
    lines = [f"{rule.id} {rule.name}", "", rule.summary, ""]
    if rule.key:
        where = "policy key" if rule.key in _POLICY_ONLY_KEYS else "model-file key"
        lines.append(f"{where}: {rule.key}" + (f" (unit: {rule.unit})" if rule.unit else ""))
    warning = rule.severity == "warning"
    for text in _MEANING.get(rule.id, ()):
        lines += ["", text]
    lines += ["", "example:", *("  " + x for x in _EXAMPLES.get(rule.id, "").splitlines()), "",
              f"A failing rule is {'a warning' if warning else 'an error'} by default; "
              f"[tool.eigengate.severity] can make it {'an error' if warning else 'a warning'} "
              "or switch it off, and a waiver (with a reason) can accept one finding."]
    return "\n".join(lines)
