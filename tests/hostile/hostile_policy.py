"""Hostile repository policies (``[tool.eigengate]``) and baseline files: each must stop the
run with one line naming the file and the key (exit 2, a configuration error), never an
internal error or a traceback."""

from __future__ import annotations

from dataclasses import dataclass


@dataclass(frozen=True)
class PolicyCase:
    id: str
    file: str          # repository-relative file written with ``text``
    text: bytes
    words: tuple[str, ...]  # what the one-line message must hold besides the file name


def _policy(id: str, body: str, *words: str) -> PolicyCase:
    return PolicyCase(id, "pyproject.toml",
                      f"[project]\nname = 'p'\n\n[tool.eigengate]\n{body}\n".encode(), words)


def _baseline(id: str, text: str | bytes, *words: str) -> PolicyCase:
    raw = text.encode() if isinstance(text, str) else text
    return PolicyCase(id, ".eigengate/baseline.json", raw, words)


POLICIES = [
    _policy("unknown-key", "includes = ['models/**']", "includes", "include"),
    _policy("include-number", "include = 5", "include"),
    _policy("include-empty-string", "include = ['']", "include"),
    _policy("exclude-table", "exclude = {a = 1}", "exclude"),
    _policy("on-uncertain", "on_uncertain = 'maybe'", "on_uncertain"),
    _policy("allow-python-text", "allow_python = 'yes'", "allow_python"),
    _policy("select-unknown", "select = ['XX9']", "select"),
    _policy("requirements-unknown", "requirements = {min_dampng = 0.2}", "min_dampng"),
    _policy("requirements-bad", "requirements = {min_damping = 7}", "min_damping"),
    _policy("severity-level", "severity = {EG103 = 'fatal'}", "severity.EG103"),
    _policy("severity-rule", "severity = {EG999 = 'error'}", "EG999"),
    _policy("severity-text", "severity = 'loud'", "severity"),
    _policy("overrides-table", "overrides = {paths = ['a']}", "overrides"),
    _policy("override-no-paths", "[[tool.eigengate.overrides]]\non_uncertain = 'pass'",
            "overrides[0].paths"),
    _policy("override-unknown", "[[tool.eigengate.overrides]]\npaths = ['a']\ncolor = 1",
            "overrides[0].color"),
    _policy("baseline-escape", "baseline = '../elsewhere.json'", "baseline"),
    _policy("baseline-absolute", "baseline = '/tmp/b.json'", "baseline"),
    _policy("drift-negative", "allowed_drift = {damping = {abs = -1}}", "allowed_drift"),
    _policy("waiver-no-reason", "[[tool.eigengate.waivers]]\nrule = 'EG103'", "waivers[0]",
            "reason"),
    _policy("waiver-bad-date", "[[tool.eigengate.waivers]]\nrule = 'EG103'\nreason = 'r'\n"
            "expires = 'soon'", "expires"),
    _policy("invalid-toml", "include = [", "TOML"),
    PolicyCase("non-utf8", "pyproject.toml", b"[tool.eigengate]\n# caf\xe9\n", ()),
    _baseline("bl-invalid-json", "{", "JSON"),
    _baseline("bl-empty", "", "JSON"),
    _baseline("bl-nan", '{"format_version": 1, "models": {"a": NaN}}', "NaN"),
    _baseline("bl-duplicate", '{"format_version": 1, "format_version": 1, "models": {}}',
              "twice"),
    _baseline("bl-conflict", '{\n<<<<<<< HEAD\n"format_version": 1,\n=======\n>>>>>>> b\n}',
              "merge-conflict"),
    _baseline("bl-newer", '{"format_version": 99, "models": {}}', "newer"),
    _baseline("bl-models-list", '{"format_version": 1, "models": []}', "models"),
    _baseline("bl-top-list", "[]", "object"),
    _baseline("bl-deep", "[" * 100000 + "]" * 100000, ""),
    _baseline("bl-not-utf8", b'{"format_version": 1, "models": {"caf\xe9": {}}}', ""),
]

#: Policy holes the gate-integrity review named.
NAMED_POLICY_HOLES = {
    "include-string": "include = 'models/*.yaml' (a string, not a list) is refused",
}
POLICIES.append(_policy("include-string", "include = 'models/*.yaml'", "include"))
