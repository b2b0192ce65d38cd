"""Waivers: a reviewed decision to accept a finding, with a mandatory reason and an optional
expiry date.

A model file waives rules for its own models (``waivers:``); the repository policy waives them
for model files matching globs (``[[tool.eigengate.waivers]]``). A waived finding is kept in
the results (marked waived) but does not fail the check. An expired waiver waives nothing and
is a finding of its own (EG002); a waiver that matched no finding is reported (EG003), so
waivers do not outlive the problem they were written for.
"""

from __future__ import annotations

import datetime as _dt
import os
from dataclasses import dataclass, replace
from typing import TYPE_CHECKING, Any, Callable, Iterable, Mapping, Sequence

from .patterns import glob_match
from ..errors import ModelError
from .dates import today  # noqa: F401 (re-exported)

if TYPE_CHECKING:  # pragma: no cover
    from .findings import Finding

__all__ = ["Waiver", "parse_waivers", "today", "split_waived", "waiver_findings",
           "scope_checked", "WAIVER_KEYS", "CONFIG_WAIVER_KEYS", "WARNING_DAYS"]

WAIVER_KEYS = ("rule", "reason", "expires", "label")
CONFIG_WAIVER_KEYS = ("rule", "reason", "expires", "label", "paths", "model")


@dataclass(frozen=True)
class Waiver:
    """Accept findings of ``rule`` for a model (and operating point ``label``, when given)."""

    rule: str
    reason: str
    origin: str  # where it was written, for messages: "models/x.yaml:14"
    source: str  # the file it was written in (repository-relative)
    line: int | None = None
    expires: _dt.date | None = None
    label: str | None = None
    model: str | None = None
    paths: tuple[str, ...] = ()

    def covers(self, finding: "Finding") -> bool:
        if finding.rule != self.rule:
            return False
        if self.label is not None and finding.label != self.label:
            return False
        if self.model is not None and finding.model != self.model:
            return False
        if self.paths and not any(glob_match(finding.source, p) for p in self.paths):
            return False
        return True

    def expired(self, on: _dt.date) -> bool:
        return self.expires is not None and self.expires < on

    def expiring(self, on: _dt.date, days: int) -> bool:
        """Live on ``on`` but expires within ``days`` days."""
        return self.expires is not None and not self.expired(on) and \
            (self.expires - on).days <= days

    def note(self, on: _dt.date) -> str:
        """``until 2027-03-31 (models/x.yaml:14)``, ``expired on …``, or ``no expiry (…)``."""
        if self.expires is None:
            return f"no expiry ({self.origin})"
        word = "expired on" if self.expired(on) else "until"
        return f"{word} {self.expires.isoformat()} ({self.origin})"


def _date(value: Any, source: str, fld: str, line: int | None) -> _dt.date:
    if isinstance(value, _dt.datetime):
        return value.date()
    if isinstance(value, _dt.date):
        return value
    if isinstance(value, str):
        try:
            return _dt.date.fromisoformat(value)
        except ValueError:
            pass
    raise ModelError(source, fld, f"must be a date YYYY-MM-DD, got {value!r}", line=line)


def parse_waivers(raw: Any, source: str, prefix: str = "waivers",
                  lines: Mapping[str, int] | None = None, *, in_config: bool = False
                  ) -> tuple[Waiver, ...]:
    """Validate a list of waivers from a model file (or, ``in_config``, from the policy)."""
    import difflib

    from .catalogue import RULES

    lines = lines or {}
    allowed = CONFIG_WAIVER_KEYS if in_config else WAIVER_KEYS
    if not isinstance(raw, list):
        raise ModelError(source, prefix, f"must be a list of waivers, got {type(raw).__name__}",
                         line=lines.get(prefix))
    out = []
    for i, item in enumerate(raw):
        fld = f"{prefix}[{i}]"
        line = lines.get(f"{prefix}.{i}", lines.get(prefix))
        if not isinstance(item, Mapping):
            raise ModelError(source, fld, f"must be a mapping, got {item!r:.60}", line=line)
        for key in item:
            if key not in allowed:
                close = difflib.get_close_matches(str(key), allowed, n=1)
                raise ModelError(source, f"{fld}.{key}", "is not a field of a waiver", line=line,
                                 hint=f"did you mean {close[0]!r}?" if close else
                                 "known fields: " + ", ".join(allowed))
        rule = item.get("rule")
        if rule not in RULES:
            close = difflib.get_close_matches(str(rule), sorted(RULES), n=1)
            raise ModelError(source, f"{fld}.rule", f"must name a rule id such as EG103, got "
                             f"{rule!r}", line=line,
                             hint=f"did you mean {close[0]!r}?" if close else
                             "`eigengate rules` lists them")
        reason = item.get("reason")
        if not isinstance(reason, str) or not reason.strip():
            raise ModelError(source, f"{fld}.reason", f"is required: say why the finding is "
                             f"accepted (got {reason!r})", line=line)
        expires = None if item.get("expires") is None else _date(item["expires"], source,
                                                                 f"{fld}.expires", line)
        label = item.get("label")
        if label is not None and not isinstance(label, str):
            raise ModelError(source, f"{fld}.label", f"must be an operating-point label, got "
                             f"{label!r}", line=line)
        paths: tuple[str, ...] = ()
        model = None
        if in_config:
            p = item.get("paths")
            if isinstance(p, str):
                p = [p]
            if not isinstance(p, list) or not p or not all(isinstance(x, str) for x in p):
                raise ModelError(source, f"{fld}.paths", f"is required: globs of the model "
                                 f"files it applies to (got {p!r})", line=line)
            paths = tuple(p)
            model = item.get("model")
            if model is not None and not isinstance(model, str):
                raise ModelError(source, f"{fld}.model", f"must be a model name, got {model!r}",
                                 line=line)
        origin = f"{source}:{line}" if line else f"{source} {fld}"
        out.append(Waiver(rule=rule, reason=reason.strip(), origin=origin, source=source,
                          line=line, expires=expires, label=label, model=model, paths=paths))
    return tuple(out)


def split_waived(findings: Iterable["Finding"], waivers: Sequence[Waiver], on: _dt.date
                 ) -> tuple[list["Finding"], list[tuple["Finding", Waiver]]]:
    """Separate the findings covered by a live (unexpired) waiver from the rest. A finding that
    only an expired waiver covers is kept with that waiver's note (expiry and line)."""
    kept, waived = [], []
    live = [w for w in waivers if not w.expired(on)]
    dead = [w for w in waivers if w.expired(on)]
    for f in findings:
        w = next((w for w in live if w.covers(f)), None)
        if f.rule in _OWN_RULES:
            kept.append(f)
        elif w is None:
            old = next((x for x in dead if x.covers(f)), None)
            kept.append(f if old is None else replace(f, waiver_note=old.note(on)))
        else:
            waived.append((replace(f, waived=w.reason, waiver_note=w.note(on)), w))
    return kept, waived


#: Findings about waivers and files themselves, which no waiver can waive.
_OWN_RULES = ("EG001", "EG002", "EG003", "EG006")

#: Days before its expiry that a waiver is reported (EG006), unless the policy says otherwise
#: (``waiver_warning_days``).
WARNING_DAYS = 30


def scope_checked(waiver: Waiver, checked: Iterable[str], complete: bool,
                  repository: Callable[[], Iterable[str]]) -> bool:
    """Whether a run judged everything a policy waiver can cover, so that "it matched no
    finding" means something.

    The scope of a waiver is the model files of the repository that its ``paths`` globs
    match. It was fully checked when the run covered the whole repository (``complete``), or
    when at least one file of the scope was checked and every model file the repository holds
    in the scope (``repository()``, listed only when needed) was checked and loaded
    (``checked``: the sources of the files that loaded). A model file's own waivers are always
    fully checked with their file.
    """
    if complete or not waiver.paths:
        return True
    done = set(checked)
    if not any(glob_match(rel, p) for rel in done for p in waiver.paths):
        return False
    return all(rel in done for rel in repository()
               if any(glob_match(rel, p) for p in waiver.paths))


def waiver_findings(waivers: Sequence[Waiver], used: Iterable[Waiver], on: _dt.date,
                    model: str = "", judged: Callable[[Waiver], bool] | None = None,
                    warning_days: int = WARNING_DAYS) -> list["Finding"]:
    """EG002 for every expired waiver, EG003 for every live waiver that covered nothing
    (with ``judged``, only for waivers it accepts, see :func:`scope_checked`), EG006 for every
    live waiver that expires within ``warning_days`` days."""
    from .findings import Finding
    from .catalogue import RULES

    used_ids = {id(w) for w in used}
    out = []
    for w in waivers:
        if w.expires is not None and w.expired(on):
            rule = RULES["EG002"]
            message = (f"waiver of {w.rule} expired on {w.expires} "
                       f"(reason given: {w.reason}); the finding it covered is reported again")
            sev = "error"
        elif id(w) not in used_ids and (judged is None or judged(w)):
            rule = RULES["EG003"]
            message = (f"waiver of {w.rule} matched no finding (reason given: {w.reason}); "
                       "remove it if the problem is gone")
            sev = "warning"
        else:
            rule = None
        if rule is not None:
            out.append(Finding(rule=rule.id, name=rule.name, severity=sev, source=w.source,
                               line=w.line, model=w.model or model, label=w.label,
                               message=message, requirement=f"waiver of {w.rule}",
                               waiver_note=w.note(on)))
        if w.expiring(on, warning_days):
            days = (w.expires - on).days if w.expires is not None else 0
            rule = RULES["EG006"]
            when = "today" if days == 0 else f"in {days} day{'' if days == 1 else 's'}"
            out.append(Finding(
                rule=rule.id, name=rule.name, severity="warning", source=w.source,
                line=w.line, model=w.model or model, label=w.label,
                message=f"waiver of {w.rule} expires {when}, on {w.expires} "
                        f"(reason given: {w.reason}); after that the finding it covers fails "
                        "the check again",
                requirement=f"waiver of {w.rule}", waiver_note=w.note(on),
                suggestion="fix the finding, or extend the waiver's expires date after review"))
    return out
