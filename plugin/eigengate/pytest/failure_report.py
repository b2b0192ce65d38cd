"""The text and records of failed stability assertions: requirement, figures, modes."""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any, Sequence

if TYPE_CHECKING:  # pragma: no cover
    from ..scan.engine import ModelResult
    from ..rules.findings import Finding
    from ..model.core import Model


@dataclass(frozen=True)
class Layer:
    """Parsed requirements of one source (``origin`` says where, for reports): the
    requirements, the rule ids switched off with ``False``, and the keys given."""

    origin: str
    requirements: tuple = ()
    off: tuple[str, ...] = ()
    keys: tuple[str, ...] = ()


def requirement_origins(model: "Model", reqs: Sequence[Any], layers: Sequence[Layer],
                        use_file: bool) -> dict[str, str]:
    """``{rule: origin}`` for each requirement checked: the layer that stated it last."""
    where: dict[str, str] = {}
    if use_file:
        for r in model.requirements:
            where[r.rule] = "model file" if not model.source.startswith("<") else "model"
    for lay in layers:
        for rule in lay.off:
            where.pop(rule, None)
        for r in lay.requirements:
            where[r.rule] = lay.origin
    return {r.rule: where.get(r.rule, "") for r in reqs}


def _value(x: Any, unit: str = "") -> str:
    if isinstance(x, float):
        text = ("-" if x < 0 else "") + "∞" if math.isinf(x) else f"{x:.6g}"
        return f"{text} {unit}".rstrip()
    return str(x)


def _measured_line(f: "Finding") -> str | None:
    parts = []
    if f.measured is not None:
        parts.append(f"measured {_value(f.measured, f.unit)}")
    if f.threshold is not None:
        parts.append(f"threshold {_value(f.threshold, f.unit)}")
    if f.margin is not None:
        parts.append(f"margin {_value(f.margin)}")
    return "        " + ", ".join(parts) if parts else None


def failure_report(what: str, failures: Sequence[tuple], checked: int) -> str:
    """The text of a failed assertion on ``what``: each failing model, finding and figures."""
    from ..reports.text import findings_lines, model_lines

    failed = sum(len(errors) for _, errors, *_ in failures)
    noun = "requirement" if checked == 1 else "requirements"
    lines = [f"{failed} of {checked} stability {noun} not met by {what}"]
    for result, errors, origin, _ in failures:
        lines.append(model_lines(result, verbose=False)[0])
        # a finding that names modes has its figures at the head of each mode's block
        def measured(f: Any) -> list[str]:
            line = None if f.modes else _measured_line(f)
            return [] if line is None else [line]

        lines.extend(findings_lines(errors, result.model.discrete, extra=measured))
        stated = ", ".join(f"{v.requirement} ({origin.get(v.rule) or 'given'})"
                           for v in result.verdicts if v.rule in origin)
        lines.append(f"  checked: {stated}")
    return "\n".join(lines)


def _figure(x: float) -> float | str:
    return x if math.isfinite(x) else ("inf" if x > 0 else "-inf")


def result_record(result: "ModelResult", verdict: str) -> dict[str, Any]:
    """One model's key figures and findings as plain, JSON-serialisable data (what pytest
    reports carry between xdist workers, the terminal summary and JUnit properties read)."""
    from ..reports.render import mode_groups
    from ..reports.text import mode_block

    m, sp = result.model, result.spectrum
    findings: list[dict[str, Any]] = []
    for f in result.findings:
        findings.append({"severity": f.severity, "rule": f.rule, "name": f.name,
                         "requirement": f.requirement, "message": f.message, "line": f.line,
                         "table": []})
    errors = [f for f in result.findings if f.severity == "error"]
    modes = [line for g in mode_groups(errors) for line in mode_block(g, m.discrete, "    ")]
    return {"model": m.title, "source": m.source, "discrete": m.discrete,
            "line": next((f.line for f in result.findings if f.line), None),
            "spectral_abscissa": _figure(sp.spectral_abscissa),
            "spectral_radius": _figure(sp.spectral_radius),
            "min_damping": _figure(sp.min_damping), "verdict": verdict, "findings": findings,
            "modes": modes}
