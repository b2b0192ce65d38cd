"""SARIF 2.1.0 report, for code-scanning services that annotate pull requests.

One run; the driver lists every rule of :data:`eigengate.rules.catalogue.RULES` (sorted by id, so a
rule's ``ruleIndex`` only changes when rules are added); one result per finding. Locations
are relative to the repository root (``uriBaseId: "%SRCROOT%"``). A waived finding is kept,
with a SARIF suppression that carries the waiver's reason.
"""

from __future__ import annotations

import hashlib
import json
from typing import Any, Iterable
from urllib.parse import quote

from .render import (all_findings, figure_data, finding_summary, json_number, json_value,
                     mode_data)

__all__ = ["render_sarif", "fingerprint", "SARIF_SCHEMA", "FINGERPRINT_KEY"]

SARIF_SCHEMA = ("https://docs.oasis-open.org/sarif/sarif/v2.1.0/errata01/os/schemas/"
                "sarif-schema-2.1.0.json")
#: Name of the partial fingerprint; the suffix is the version of how the hash is formed.
FINGERPRINT_KEY = "eigengateFinding/v1"


def _first_sentence(text: str) -> str:
    head, dot, _ = text.partition(". ")
    return head + "." if dot else text


def _rules(seen: Iterable[str]) -> list[dict[str, Any]]:
    from ..rules.catalogue import RULES

    out = []
    for rid in sorted(set(RULES) | set(seen)):
        rule = RULES.get(rid)
        if rule is None:  # a finding of a rule this version does not describe
            out.append({"id": rid, "defaultConfiguration": {"level": "error"}})
            continue
        entry: dict[str, Any] = {
            "id": rule.id, "name": rule.name,
            "shortDescription": {"text": _first_sentence(rule.summary)},
            "fullDescription": {"text": rule.summary},
            # A failing rule is an error unless the repository policy says otherwise.
            "defaultConfiguration": {"level": "error"},
        }
        props = {k: v for k, v in (("key", rule.key), ("unit", rule.unit)) if v}
        if props:
            entry["properties"] = props
        out.append(entry)
    return out


def _uri(source: str) -> tuple[str, str | None]:
    """(uri, uriBaseId): repository-relative paths against %SRCROOT%, others as they are."""
    path = source.replace("\\", "/")
    if path.startswith("/") or (len(path) > 2 and path[1] == ":"):
        from pathlib import PurePosixPath, PureWindowsPath

        pure = PureWindowsPath(source) if path[1:2] == ":" else PurePosixPath(path)
        return pure.as_uri(), None
    return quote(path, safe="/-._~"), "%SRCROOT%"


def fingerprint(f: Any) -> str:
    """Stable identity of a finding across runs: rule, file, model title and requirement
    (not the measured value, so a finding that only gets better or worse keeps its id)."""
    key = "\x1f".join((f.rule, f.source, f.title, f.requirement))
    return hashlib.sha256(key.encode("utf-8")).hexdigest()


def _result(f: Any, index: dict[str, int], grid_point: dict[str, Any] | None = None
            ) -> dict[str, Any]:
    uri, base = _uri(f.source)
    artifact: dict[str, Any] = {"uri": uri}
    if base is not None:
        artifact["uriBaseId"] = base
    physical: dict[str, Any] = {"artifactLocation": artifact}
    if f.line:
        physical["region"] = {"startLine": int(f.line)}
    location: dict[str, Any] = {"physicalLocation": physical}
    if f.title:
        location["logicalLocations"] = [{"name": f.title, "kind": "module"}]
    out: dict[str, Any] = {
        "ruleId": f.rule, "ruleIndex": index[f.rule],
        "level": "error" if f.severity == "error" else "warning",
        "message": {"text": "\n".join(finding_summary(f))},
        "locations": [location],
        "partialFingerprints": {FINGERPRINT_KEY: fingerprint(f)},
        "properties": {
            "model": f.model, "label": f.label, "requirement": f.requirement,
            "measured": json_value(f.measured), "threshold": json_value(f.threshold),
            "margin": json_number(f.margin), "unit": f.unit, "uncertain": bool(f.uncertain),
            "decidedBy": getattr(f, "decided_by", "") or None,
            "figure": figure_data(getattr(f, "figure", None)),
            "modes": [mode_data(m) for m in f.modes],
            "before": [mode_data(m) for m in getattr(f, "before", ())],
        },
    }
    if grid_point is not None:
        out["properties"]["gridPoint"] = grid_point
    reason = getattr(f, "waived", None)
    if reason:
        out["suppressions"] = [{"kind": "external", "status": "accepted",
                                "justification": reason}]
    return out


def render_sarif(results: Iterable[Any], *, tool_version: str) -> str:
    """Render :class:`~eigengate.scan.engine.FileResult` objects as a SARIF 2.1.0 log.

    Parameters
    ----------
    results
        The checked files.
    tool_version
        The eigengate version (``tool.driver.version``).

    Returns
    -------
    str
        Indented JSON text with sorted keys, ending in a newline.
    """
    results = list(results)
    findings = []
    points: dict[tuple[str, str], dict[str, Any]] = {}  # (source, title) → grid coordinates
    grids = []
    for fr in results:  # file by file: its findings, then the waived ones
        findings += [f for _, _, f in all_findings([fr])]
        findings += [f for r in fr.results for f in getattr(r, "waived", ())]
        if fr.grid is not None:
            grids.append({"source": fr.source, "headline": fr.grid.headline(),
                          "failing": [p.ident for p in fr.grid.failing]})
            points.update({(fr.source, p.title): {a: json_number(v) for a, v in p.coords}
                           for p in fr.grid.points})
    rules = _rules(f.rule for f in findings)
    index = {rule["id"]: i for i, rule in enumerate(rules)}
    run = {
        "tool": {"driver": {"name": "eigengate", "version": tool_version, "rules": rules}},
        "originalUriBaseIds": {"%SRCROOT%": {"description": {
            "text": "The repository root; model file paths are relative to it."}}},
        "columnKind": "unicodeCodePoints",
        "results": [_result(f, index, points.get((f.source, f.title))) for f in findings],
    }
    if grids:  # operating-point grids: each one's headline and failing points
        run["properties"] = {"grids": grids}
    log = {"$schema": SARIF_SCHEMA, "version": "2.1.0", "runs": [run]}
    return json.dumps(log, indent=2, sort_keys=True, ensure_ascii=False, allow_nan=False) + "\n"
