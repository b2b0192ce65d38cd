"""Baseline workflow shared by the command line and the pytest plugin: compare checked models
with the accepted baseline (or a git revision), fold the regression findings into the results,
and accept the current models as the new baseline.
"""

from __future__ import annotations

from dataclasses import replace
from pathlib import Path
from typing import TYPE_CHECKING, Sequence

if TYPE_CHECKING:  # pragma: no cover
    from ..baseline.store import Baseline, MergeSummary
    from .config import Config
    from .engine import FileResult, ModelResult
    from ..baseline.regressions import Comparison, Outcome

__all__ = ["reference_baseline", "compare_files", "compare_result", "with_regressions",
           "accept", "accept_command", "stale_entries", "inputs_reader", "entry_of",
           "accept_paths"]


def inputs_reader(config: "Config"):
    """``result → its model's inputs``: the loader's own when the result has them, else the
    model file read again (a result from the cache or a worker process; each file read once
    per reader). None when the file cannot be read (it changed, or is gone)."""
    from ..errors import EigengateError

    files: dict[str, dict] = {}

    def inputs_of(result: "ModelResult"):
        model = result.model
        if getattr(model, "file_inputs", None) is not None:
            return model.file_inputs
        if model.source not in files:
            from ..load.loader import inputs_by_title

            try:
                files[model.source] = inputs_by_title(config.root / model.source, config.root,
                                                      allow_python=config.allow_python)
            except (EigengateError, OSError):
                files[model.source] = {}
        return files[model.source].get(model.title)

    return inputs_of


def entry_of(result: "ModelResult", config: "Config", reader=None):
    """The baseline entry of ``result``, with its inputs (read again when it has none)."""
    from ..baseline.store import baseline_entry_from

    return baseline_entry_from(result, inputs=(reader or inputs_reader(config))(result))


def reference_baseline(config: "Config", against: str | None = None) -> "Baseline | None":
    """What to compare with: the models of git revision ``against``, else the stored baseline
    file, else None (no baseline accepted yet: nothing to compare)."""
    if against is not None:
        from .gitrev import revision_baseline

        return revision_baseline(against, config.root, config=config).baseline
    if not has_baseline(config):
        return None
    from ..baseline.store import Baseline

    path = config.baseline_path
    if not path.is_file():  # a nested policy has one: compare (the others' models are new)
        return Baseline(path=str(path))
    return Baseline.load(path)


def has_baseline(config: "Config") -> bool:
    """Whether the policy or a nested one has a baseline file."""
    return config.baseline_path.is_file() or \
        any(p.baseline_path.is_file() for p in config.policies()[1:])


def _by_policy(files: Sequence["FileResult"], config: "Config"
               ) -> list[tuple["Config", list["FileResult"]]]:
    """``files`` grouped by the policy that judges them (each has its own baseline)."""
    groups: dict[int, tuple["Config", list["FileResult"]]] = {}
    for fr in files:
        policy = config.policy_for(fr.source)
        groups.setdefault(id(policy), (policy, []))[1].append(fr)
    return list(groups.values())


def _policy_baseline(policy: "Config", config: "Config", baseline: "Baseline") -> "Baseline":
    from ..baseline.store import Baseline

    if policy is config:
        return baseline
    path = policy.baseline_path
    return Baseline.load(path) if path.is_file() else Baseline(path=str(path))


def compare_files(files: Sequence["FileResult"], config: "Config", baseline: "Baseline", *,
                  complete: bool) -> "Outcome":
    """Compare every checked model with ``baseline`` under the policy's tolerances and
    severities; findings of rules the policy switches off are dropped."""
    from ..baseline.regressions import Outcome, compare_all

    # the stored baselines are per policy; a git revision's models are one baseline
    stored = baseline.path is None or Path(baseline.path) == config.baseline_path
    groups = _by_policy(files, config) if stored else [(config, list(files))]
    reader = inputs_reader(config)
    parts = []
    for policy, group in groups:
        ref = _policy_baseline(policy, config, baseline) if stored else baseline
        outcome = compare_all(group, ref, config.tolerances_for, complete=complete,
                              severities=dict(policy.severity), inputs_for=reader)
        kept = tuple(f for f in outcome.findings if policy.rule_enabled(f.rule))
        parts.append(replace(outcome, findings=kept))
    if len(parts) == 1:
        return parts[0]
    return Outcome(**{name: tuple(x for o in parts for x in getattr(o, name))
                      for name in ("findings", "improvements", "stale_keys", "new_keys",
                                   "comparisons")})


def compare_result(result: "ModelResult", config: "Config", baseline: "Baseline"
                   ) -> tuple["ModelResult", "Comparison"]:
    """One analysed model against its entry in ``baseline``, as :func:`compare_files` judges
    it (the pytest items compare one model at a time): the result with the regression
    findings added, and the comparison; findings of rules the policy switches off are
    dropped."""
    from ..baseline.regressions import compare

    entry = baseline.match(result.model.source, result.model.title,
                           getattr(result.model, "point_id", None))
    policy = config.policy_for(result.model.source)
    comparison = compare(result, entry, config.tolerances_for(result),
                         severities=dict(policy.severity),
                         unreadable=baseline.unreadable.get(result.model.source),
                         inputs_for=inputs_reader(config))
    kept = tuple(f for f in comparison.regressions if policy.rule_enabled(f.rule))
    comparison = replace(comparison, regressions=kept)
    return (replace(result, findings=result.findings + kept) if kept else result), comparison


def stale_entries(baseline: "Baseline", models: dict[str, set[str]], root: Path
                  ) -> list[tuple[tuple[str, str], str]]:
    """Entries of ``baseline`` whose model no longer exists, with the reason: entries of a
    file in ``models`` (source -> the titles it defines now) that it no longer defines, and
    entries of a model file that is gone from ``root``. Files absent from ``models`` that
    still exist (not checked, or failed to load) keep their entries."""
    out = []
    for key in baseline.keys():
        source, title = key
        if source in models:
            if title not in models[source]:
                out.append((key, "its model file no longer defines it"))
        elif not (root / source).exists():
            out.append((key, "its model file is gone"))
    return out


def with_regressions(files: Sequence["FileResult"], outcome: "Outcome", config: "Config"
                     ) -> list["FileResult"]:
    """``files`` with each regression finding added to its model's result, and the stale
    baseline entries as findings of the baseline file (appended as a result of its own)."""
    from .engine import FileResult

    by_key: dict[tuple[str, str | None, str], list] = {}
    loose = []
    for f in outcome.findings:
        if f.rule == "EG209":
            loose.append(f)
        else:
            by_key.setdefault((f.source, f.label, f.model), []).append(f)
    out = []
    for fr in files:
        if fr.error is not None or not fr.results:
            out.append(fr)
            continue
        results = []
        for r in fr.results:
            extra = by_key.get((r.model.source, r.model.label, r.model.name), [])
            results.append(replace(r, findings=r.findings + tuple(extra)) if extra else r)
        model_ids = {id(f) for r in fr.results for f in r.findings}
        own = tuple(f for f in fr.findings if id(f) not in model_ids)
        out.append(replace(fr, results=tuple(results),
                           findings=tuple(f for r in results for f in r.findings) + own))
    if loose:
        out.append(FileResult(source=config.baseline, findings=tuple(loose)))
    return out


def accept(files: Sequence["FileResult"], config: "Config", *, complete: bool
           ) -> "MergeSummary":
    """Write the current models of ``files`` into the baseline (locked, atomic, merged with
    what is there). With ``complete`` (the whole repository was checked), entries of models
    that no longer exist are removed; otherwise only entries of the checked files that lost a
    model are. Files that failed to load keep their entries."""
    from ..baseline.store import Baseline, MergeSummary, merge_write

    parts = []
    reader = inputs_reader(config)
    for policy, group in _by_policy(files, config) or [(config, [])]:
        entries = [entry_of(r, config, reader) for fr in group if fr.error is None
                   for r in fr.results]
        path = policy.baseline_path
        current = Baseline.load(path) if path.is_file() else Baseline()
        seen = {e.key for e in entries}
        checked = {fr.source for fr in group if fr.error is None}
        broken = {fr.source for fr in group if fr.error is not None}
        stale = [k for k in current.keys() if k not in seen and k[0] not in broken
                 and (complete or k[0] in checked)]
        parts.append(merge_write(path, entries, removed_keys=stale))
    if len(parts) == 1:
        return parts[0]
    return MergeSummary(added=tuple(k for p in parts for k in p.added),
                        changed=tuple(k for p in parts for k in p.changed),
                        removed=tuple(k for p in parts for k in p.removed),
                        unchanged=tuple(k for p in parts for k in p.unchanged),
                        written=any(p.written for p in parts))


def accept_paths(paths: Sequence[str], files: Sequence["FileResult"], root: str | Path
                 ) -> list[str] | None:
    """The paths of a check that ``eigengate baseline accept`` takes and accepts without an
    error: folders as given (or, where one holds a model file that did not load, the files of
    it that did), and the named files that were checked and loaded; None when nothing
    checked can be accepted. Non-model files, deleted files and broken model files are left
    out (the accept command refuses a missing path and fails on a broken file)."""
    import os

    base = os.path.realpath(root)

    def rel(p: str) -> str:
        return os.path.relpath(os.path.realpath(p), base).replace(os.sep, "/")

    loaded = sorted(fr.source for fr in files if fr.error is None and fr.results)
    named = {rel(p) for p in paths if not os.path.isdir(p)}  # left out below when broken
    broken = {fr.source for fr in files if fr.error is not None} - named
    keep: list[str] = []
    for p in paths:
        here = rel(p)
        if os.path.isdir(p):
            inside = (lambda s: True) if here == "." else \
                (lambda s, h=here: s.startswith(h + "/"))
            if any(inside(s) for s in broken):
                keep += [os.path.relpath(os.path.join(base, s)) for s in loaded if inside(s)]
            else:
                keep.append(p)
        elif os.path.isfile(p) and here in loaded:
            keep.append(p)
    if paths and not keep:
        return None
    return list(dict.fromkeys(keep))


def accept_command(paths: Sequence[str], config_flag: str | None = None, *,
                   files: Sequence["FileResult"] | None = None,
                   root: str | Path | None = None) -> str | None:
    """The exact command that accepts what was just checked (with ``files`` and ``root``:
    only what :func:`accept_paths` keeps; None when that is nothing)."""
    import shlex

    if files is not None and root is not None:
        kept = accept_paths(paths, files, root)
        if kept is None:
            return None
        paths = kept
    parts = ["eigengate", "baseline", "accept"]
    if config_flag:
        parts += ["--config", config_flag]
    parts += [str(Path(p)) for p in paths]
    return " ".join(shlex.quote(p) for p in parts)
