"""Formatting shared by the report writers: JSON-safe numbers, mode cells, walking results.

Nothing here computes a figure: every number comes from a finding, a verdict, a spectrum's
summary properties or an equilibrium, and is only formatted.

JSON numbers are written as JSON numbers with Python's ``repr`` precision (the shortest text
that reads back to the same float), except the three values JSON has no number for, which
become the strings ``"inf"``, ``"-inf"`` and ``"nan"``. ``null`` always means *not
applicable*, never infinity.
"""

from __future__ import annotations

import math
from numbers import Integral
from dataclasses import dataclass
from typing import Any, Iterable, Iterator

from ..rules.findings import DECIDED_NOTES, UNCERTAIN_NOTE, Finding, ModeRow

__all__ = ["UNCERTAIN_NOTE", "DECIDED_NOTES", "json_number", "json_value", "json_complex", "mode_data", "finding_data",
           "text_number", "mode_cells", "mode_summary", "mode_name", "eigenvalue_text",
           "states_text", "mode_figures", "mode_detail", "pairs_text", "finding_figure",
           "measured_text", "waiver_text",
           "ModeGroup", "mode_groups", "finding_summary", "own_findings",
           "model_findings", "all_findings", "status_of", "tally", "plural", "CAUTION", "summary_line",
           "cause_lines", "cause_data"]

#: Said by every report meant for people: what the tool is, and what it is not.
CAUTION = ("eigengate is an engineering aid for model regression checks; it is not a safety "
           "sign-off.")


def format_eigenvalue(z: complex, pair: bool) -> str:
    if z.imag == 0.0:
        return f"{z.real:.6g}"
    sign = "±" if pair else ("+" if z.imag > 0 else "-")
    return f"{z.real:.6g}{sign}{abs(z.imag):.6g}j"


def json_number(x: Any) -> Any:
    """``x`` as a JSON number, ``"inf"``/``"-inf"``/``"nan"`` where JSON has none, or None."""
    if x is None or isinstance(x, bool):
        return x
    if isinstance(x, Integral):
        return int(x)
    x = float(x)
    if math.isnan(x):
        return "nan"
    if math.isinf(x):
        return "inf" if x > 0 else "-inf"
    return x + 0.0  # + 0.0 turns -0.0 into 0.0, so the output does not depend on its sign


def json_value(x: Any) -> Any:
    """A measured value or threshold: a number (see :func:`json_number`), text, or None."""
    return x if isinstance(x, str) else json_number(x)


def json_complex(z: complex) -> dict[str, Any]:
    """``{"re": ..., "im": ...}`` with JSON-safe parts."""
    z = complex(z)
    return {"re": json_number(z.real), "im": json_number(z.imag)}


def mode_data(row: ModeRow) -> dict[str, Any]:
    """One offending mode as JSON data (the member with Im ≥ 0 for a conjugate pair)."""
    return {
        "index": row.index,
        "eigenvalue": json_complex(row.eigenvalue),
        "s": json_complex(row.s),
        "pair": bool(row.pair),
        "multiplicity": int(row.multiplicity),
        "defective": bool(row.defective),
        "damping_ratio": json_number(row.damping_ratio),
        "natural_frequency": json_number(row.natural_frequency),
        "time_constant": json_number(row.time_constant),
        "uncertainty": json_number(row.uncertainty),
        "condition": json_number(row.condition),
        "top_states": [{"state": name, "participation": json_number(p)}
                       for name, p in row.top_states],
        "name": getattr(row, "name", ""),
    }


def cause_lines(f: Finding) -> list[str]:
    """A regression's causes for people, one line each (the first names the input that moved
    the mode most), with the line of the input in the model file; every writer shows these
    (plain text: each writer escapes it its own way)."""
    out = []
    for c in getattr(f, "cause", ()):
        out.append(c.text + (f" (line {c.line})" if c.input and c.line else ""))
    return out


def cause_data(f: Finding) -> list[dict[str, Any]]:
    """A regression's causes as JSON data."""
    return [{"text": c.text, "input": c.input or None, "before": json_number(c.before),
             "after": json_number(c.after), "share": json_number(c.share),
             "shift": None if c.shift is None else json_complex(c.shift), "line": c.line,
             "file": c.file} for c in getattr(f, "cause", ())]


def figure_data(fig: Any) -> dict[str, Any] | None:
    """A robustness figure as JSON data (its plot data left out), or None."""
    if fig is None:
        return None
    return {"name": fig.name, "value": json_number(fig.value),
            "lower": json_number(fig.lower), "upper": json_number(fig.upper), "unit": fig.unit,
            "at": [json_number(x) for x in fig.at], "at_label": fig.at_label,
            "method": fig.method, "notes": list(fig.notes)}


def figure_line(fig: Any) -> str | None:
    """One line for people: the figure, its bracket, where it is attained and how found."""
    if fig is None:
        return None
    unit = f" {fig.unit}" if fig.unit else ""
    text = f"{fig.name.replace('_', ' ')} {text_number(fig.value, 6)}{unit} in " \
           f"[{text_number(fig.lower, 6)}, {text_number(fig.upper, 6)}]"
    if fig.at:
        text += f" at {fig.at_label or 'point'} = " + ", ".join(text_number(x, 6) for x in fig.at)
    return text + (f"; method: {fig.method}" if fig.method else "")


def finding_data(f: Finding) -> dict[str, Any]:
    """A finding as JSON data, modes included (and, for a regression, the same modes as the
    baseline has them, under ``before``)."""
    return {
        "rule": f.rule, "name": f.name, "severity": f.severity, "source": f.source,
        "line": f.line, "model": f.model, "label": f.label, "title": f.title,
        "message": f.message, "requirement": f.requirement,
        "measured": json_value(f.measured), "threshold": json_value(f.threshold),
        "margin": json_number(f.margin), "unit": f.unit, "uncertain": bool(f.uncertain),
        "decided_by": getattr(f, "decided_by", "") or None, "suggestion": f.suggestion,
        "waived": getattr(f, "waived", None), "figure": figure_data(getattr(f, "figure", None)),
        "modes": [mode_data(m) for m in f.modes],
        "before": [mode_data(m) for m in getattr(f, "before", ())],
        "cause": cause_data(f),
    }


def text_number(x: float | None, digits: int = 4, unit: str = "") -> str:
    """``x`` to ``digits`` significant digits for people (``∞``, ``-∞``, ``NaN``; ``–`` for
    None)."""
    if x is None:
        return "–"
    x = float(x)
    if math.isnan(x):
        text = "NaN"
    elif math.isinf(x):
        text = "∞" if x > 0 else "-∞"
    else:
        text = f"{x + 0.0:.{digits}g}"
    return f"{text} {unit}" if unit else text


def mode_name(row: ModeRow) -> str:
    """What people call the mode: its name from the participating states, else its number."""
    # the name's head ("sway mode"); its states are shown beside it with their factors
    return getattr(row, "name", "").split(":", 1)[0] or f"mode {row.index}"


def eigenvalue_text(row: ModeRow) -> str:
    """The eigenvalue (the pair as ``a±bj``), with its multiplicity when it repeats."""
    ev = format_eigenvalue(row.eigenvalue, row.pair)
    if row.multiplicity > 1:
        ev += f" ×{row.multiplicity}" + (" (defective)" if row.defective else "")
    return ev


def states_text(row: ModeRow) -> str:
    """``sway_rate 0.50, sway_angle 0.48``: the dominant states and their participation."""
    return ", ".join(f"{name} {p:.2f}" for name, p in row.top_states)


def mode_figures(row: ModeRow, discrete: bool = False) -> list[tuple[str, str]]:
    """(label, value) of a mode after its name: eigenvalue (and its s-plane equivalent for a
    discrete model), natural frequency, damping ratio, time constant, participating states."""
    out = [("z" if discrete else "eigenvalue", eigenvalue_text(row))]
    if discrete:
        out.append(("s equivalent", format_eigenvalue(row.s, row.pair)))
    out += [("ωn", text_number(row.natural_frequency, 4, "rad/s")),
            ("ζ", text_number(row.damping_ratio, 3)),
            ("τ", text_number(row.time_constant, 4, "s"))]
    if row.top_states:
        out.append(("states", states_text(row)))
    return out


def mode_detail(row: ModeRow) -> list[tuple[str, str]]:
    """(label, value) of the detail view: the eigenvalue's error bound and condition number."""
    return [("error bound", text_number(row.uncertainty, 2)),
            ("condition number", text_number(row.condition, 3))]


def pairs_text(pairs: Iterable[tuple[str, str]]) -> str:
    """``ωn 3.072 rad/s · ζ 0.167``."""
    return " · ".join(f"{label} {value}" for label, value in pairs)


def measured_text(f: Finding) -> str:
    """The measured value with its threshold (the baseline's value, for a regression) and
    margin: ``0.1669 (threshold 0.3, margin -0.1331)``; empty when the finding has none."""
    if f.measured is None or isinstance(f.measured, str):
        return str(f.measured or "")
    unit = f" {f.unit}" if f.unit else ""
    parts = []
    if f.threshold is not None and not isinstance(f.threshold, str):
        word = "baseline" if f.requirement == "baseline" else "threshold"
        parts.append(f"{word} {text_number(f.threshold)}{unit}")
    if f.margin is not None:
        parts.append(f"margin {text_number(f.margin)}")
    return f"{text_number(f.measured)}{unit}" + (f" ({', '.join(parts)})" if parts else "")


def finding_figure(f: Finding) -> str:
    """The figure a finding is about, with threshold and margin:
    ``EG103 damping-ratio 0.1669 (threshold 0.3, margin -0.1331)``."""
    worst = " (the worst of its modes)" if len(f.modes) > 1 else ""
    return " ".join(x for x in (f"{f.rule} {f.name}", measured_text(f)) if x) + worst


def waiver_text(f: Finding) -> str:
    """``measured 0.2611 (threshold 0.3, margin -0.03892); waiver until 2027-03-31 (x:14)``."""
    measured = measured_text(f)
    note = getattr(f, "waiver_note", "")
    return "; ".join(x for x in (f"measured {measured}" if measured else "",
                                 f"waiver {note}" if note else "") if x)


@dataclass(frozen=True)
class ModeGroup:
    """One mode of a model and every finding that names it (one table per mode)."""

    row: ModeRow
    findings: tuple[Finding, ...]
    before: ModeRow | None = None  # the same mode as the baseline has it, for a regression
    gone: bool = False  # a mode of the baseline that the model no longer has

    @property
    def title(self) -> str:
        name = mode_name(self.row)
        return f"{name} of the baseline (no longer found)" if self.gone else name


def mode_groups(findings: Iterable[Finding]) -> list[ModeGroup]:
    """The modes the findings name, each once, in the order first named, with the findings
    that name it (and its baseline counterpart, where a regression gives one)."""
    order: list[tuple] = []
    rows: dict[tuple, ModeRow] = {}
    by: dict[tuple, list[Finding]] = {}
    before: dict[tuple, ModeRow] = {}
    for f in findings:
        old = tuple(getattr(f, "before", ()))
        gone = f.requirement == "baseline" and not old  # the modes are the baseline's
        for i, row in enumerate(f.modes):
            key = (row.index, row.eigenvalue, row.multiplicity, gone)
            if key not in rows:
                order.append(key)
                rows[key] = row
                by[key] = []
            if f not in by[key]:
                by[key].append(f)
            if i < len(old) and key not in before:
                before[key] = old[i]
    return [ModeGroup(rows[k], tuple(by[k]), before.get(k), k[3]) for k in order]


def mode_cells(row: ModeRow) -> list[str]:
    """Name, eigenvalue (×multiplicity), ωn [rad/s], ζ, τ [s], participating states."""
    return [mode_name(row), eigenvalue_text(row), text_number(row.natural_frequency),
            text_number(row.damping_ratio, 3), text_number(row.time_constant),
            states_text(row)]


def mode_summary(row: ModeRow, discrete: bool = False) -> str:
    """``sway mode: eigenvalue -0.2±1.98997j · ωn 2 rad/s · ζ 0.1 · τ 5 s · states …``."""
    return f"{mode_name(row)}: {pairs_text(mode_figures(row, discrete))}"


def finding_summary(f: Finding, *, with_title: bool = True) -> list[str]:
    """The lines of a compact finding: message, offending modes (and their baseline
    counterparts, for a regression), hint."""
    head = f"{f.title}: {f.message}" if with_title and f.title else f.message
    lines = [head]
    if f.modes:
        lines.append("modes: " + "; ".join(mode_summary(m) for m in f.modes))
    before = getattr(f, "before", ())
    if before:
        lines.append("in the baseline: " + "; ".join(mode_summary(m) for m in before))
    lines += [f"cause: {c}" for c in cause_lines(f)]
    if f.suggestion:
        lines.append(f"hint: {f.suggestion}")
    return lines


def model_findings(fr: Any) -> Iterator[tuple[Any, Finding]]:
    """(model result, finding) for every finding of every model of ``fr``, in order."""
    for r in fr.results:
        for f in r.findings:
            yield r, f


def own_findings(fr: Any) -> list[Finding]:
    """The file's own findings (invalid file, expired or unused waivers, policy), which belong
    to no model result."""
    shown = {id(f) for r in fr.results for f in r.findings}
    return [f for f in fr.findings if id(f) not in shown]


def all_findings(results: Iterable[Any]) -> Iterator[tuple[Any, Any, Finding]]:
    """(file result, model result or None, finding) for every finding, file by file."""
    for fr in results:
        for r, f in model_findings(fr):
            yield fr, r, f
        for f in own_findings(fr):
            yield fr, None, f


def status_of(findings: Iterable[Finding]) -> str:
    """``failed`` (an error), ``warning`` (only warnings) or ``passed`` (no finding)."""
    severities = {f.severity for f in findings}
    if "error" in severities:
        return "failed"
    return "warning" if severities else "passed"


def tally(results: Iterable[Any]) -> dict[str, int]:
    """Counts for a summary: files, invalid files, models, failed models, errors, warnings,
    waived findings."""
    out = dict.fromkeys(("files", "invalid_files", "models", "failed_models", "errors",
                         "warnings", "waived"), 0)
    for fr in results:
        out["files"] += 1
        out["invalid_files"] += fr.error is not None
        for r in fr.results:
            out["models"] += 1
            out["failed_models"] += not r.passed
            out["waived"] += len(getattr(r, "waived", ()))
        for f in fr.findings:
            out["errors" if f.severity == "error" else "warnings"] += 1
    return out


def summary_line(files: int, models: int, failing: int, errors: int, warnings: int,
                 invalid: int = 0) -> str:
    """``12 files, 18 models checked: 1 failing model (3 error findings), 0 warnings``: the
    failing models (and, apart, the files that could not be read) kept apart from the
    findings that fail them."""
    what = [plural(failing, "failing model")] if failing or not invalid else []
    if invalid:
        what.append(plural(invalid, "invalid file"))
    text = ", ".join(what)
    if errors:
        text += f" ({plural(errors, 'error finding')})"
    return (f"{plural(files, 'file')}, {plural(models, 'model')} checked: {text}, "
            f"{plural(warnings, 'warning')}")


def plural(n: int, word: str) -> str:
    """``1 model``, ``2 models``."""
    return f"{n} {word}{'' if n == 1 else 's'}"
