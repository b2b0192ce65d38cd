"""The pipeline every front end calls: source → models → spectra → verdicts → findings."""

from __future__ import annotations


from pathlib import Path
from typing import TYPE_CHECKING, Iterable, Sequence

from ..errors import ModelError
from ..rules.findings import Finding, error_finding, findings_of
from ..rules.results import FileResult, ModelResult
from ..model.core import Model
from .discovery import MODEL_SUFFIXES  # re-exported: the suffixes live with discovery

if TYPE_CHECKING:  # pragma: no cover
    import datetime

    from .config import Config

__all__ = ["ModelResult", "FileResult", "analyse_model", "apply_waivers", "check_model",
           "analyse_file", "analyse_files", "file_result", "check_file", "check_paths",
           "discover_model_files", "policy_findings", "unselected_findings", "MODEL_SUFFIXES"]



def analyse_model(model: Model, config: "Config | None" = None) -> ModelResult:
    """Analyse one model and evaluate its requirements (the repository layers of ``config``
    below the model's own, when given); no waivers applied yet."""
    analyse, evaluate, origin, classify, pictures_of = _stages or _analysis_stages()
    if config is not None:
        config = config.policy_for(model.source)  # a nested policy judges its own folder
        model = config.effective(model)
    if model.sparse:  # a sparse model's search covers the regions its requirements judge
        from ..analysis.sparse_modes import spectrum_of
        from ..rules.partial import search_targets

        spectrum = spectrum_of(model, search_targets(model.requirements))
    else:  # every eigenvalue: no regions to cover (spectrum_of's dense analysis)
        spectrum = analyse(model)
    verdicts = evaluate(spectrum) or (_nothing_checked(),)
    if model.known_modes:
        from ..rules.requirements import split_known_modes

        equilibrium = origin(split_known_modes(spectrum, model.known_modes)[0], spectrum)[0]
    else:  # origin() of every mode: none declared, nothing set aside
        modes = spectrum.modes
        equilibrium = classify(modes, declared=0, set_aside=bool(modes))
    if spectrum.search is not None:  # classified from the modes found: not decided
        from dataclasses import replace

        equilibrium = replace(equilibrium, uncertain=True, detail=f"from the "
                              f"{spectrum.n_eigenvalues} eigenvalues a sparse search found "
                              f"of {model.n_states}, not the whole spectrum")
    result = object.__new__(ModelResult)  # ModelResult(...) without the frozen __init__'s cost
    result.__dict__.update(model=model, spectrum=spectrum, equilibrium=equilibrium,
                           verdicts=verdicts, findings=tuple(findings_of(model, verdicts, config)),
                           waived=(), used_waivers=(), pictures=pictures_of(model, verdicts))
    return result


#: The functions :func:`analyse_model` calls, imported on its first call (the analysis
#: modules stay unimported until a model is analysed; a statement ``from … import`` in the
#: function itself would cost microseconds per model).
_stages: tuple = ()


def _analysis_stages() -> tuple:
    global _stages
    from ..analysis.equilibrium import classify
    from ..analysis.modes import analyse
    from ..rules.pictures import pictures_of
    from ..rules.origin_requirements import origin
    from ..rules.requirements import evaluate

    _stages = (analyse, evaluate, origin, classify, pictures_of)
    return _stages


def _nothing_checked():
    """The verdict of a model that no requirement applies to: it is not a pass (EG005)."""
    from ..rules.catalogue import RULES, Verdict

    return Verdict(
        rule="EG005", name=RULES["EG005"].name, requirement="requirements", passed=False,
        uncertain=False, measured="none", threshold="at least one requirement", margin=None,
        unit="", offending=(),
        message="no requirement applies to this model (none in the file, none from the "
                "policy): nothing was checked",
        suggestion="add requirements: {stable: true} to the model file, or "
                   "[tool.eigengate.requirements] stable = true to the policy")


def apply_waivers(result: ModelResult, config: "Config | None" = None,
                  on: "datetime.date | None" = None) -> ModelResult:
    """Set aside the findings that a live waiver of the model file or the policy accepts."""
    model = result.model
    config = config.policy_for(model.source) if config is not None else None
    waivers = model.waivers + (config.waivers_for(model.source) if config else ())
    if not waivers:
        return result
    from dataclasses import replace

    from ..rules.waivers import split_waived, today

    kept, waived = split_waived(result.findings, waivers, on or today())
    return replace(result, findings=tuple(kept), waived=tuple(f for f, _ in waived),
                   used_waivers=tuple(w for _, w in waived))


def check_model(model: Model, config: "Config | None" = None,
                on: "datetime.date | None" = None) -> ModelResult:
    """:func:`analyse_model` then :func:`apply_waivers`; ``on`` is the date waivers are
    judged on (default: today)."""
    return apply_waivers(analyse_model(model, config), config, on)


def file_result(source: str, results: Sequence[ModelResult], error: ModelError | None,
                config: "Config | None" = None, on: "datetime.date | None" = None
                ) -> FileResult:
    """Assemble a file's result from its analysed (pre-waiver) models: waivers applied, and
    the file's expired or unused waivers reported."""
    if error is not None:
        return FileResult(source=error.source, error=error, findings=(error_finding(error),))
    results = tuple([apply_waivers(r, config, on) for r in results])
    first = results[0].model
    findings = tuple([f for r in results for f in r.findings])
    if first.waivers:
        from ..rules.waivers import WARNING_DAYS, today, waiver_findings

        on = on or today()
        days = config.policy_for(source).waiver_warning_days if config is not None else \
            WARNING_DAYS
        findings += tuple(waiver_findings(first.waivers,
                                          [w for r in results for w in r.used_waivers], on,
                                          model=first.name, warning_days=days))
    return FileResult(source=source, results=results, findings=findings)


def analyse_file(path: str | Path, root: str | Path | None = None,
                 config: "Config | None" = None, rel: str | None = None
                 ) -> tuple[str, tuple[ModelResult, ...], ModelError | None, list[str]]:
    """Load and analyse a model file without waivers: (source, results, error, referenced
    matrix files). The cache stores exactly this. ``rel``: the file's path relative to the
    configuration's root, links resolved, when discovery has found it already."""
    return analyse_files([(path, rel)], root, config)[0]


def analyse_files(files: Sequence[tuple[str | Path, str | None] |
                                  tuple[str | Path, str | None, bytes | None]],
                  root: str | Path | None = None, config: "Config | None" = None
                  ) -> list[tuple[str, tuple[ModelResult, ...], ModelError | None, list[str]]]:
    """:func:`analyse_file` of each ``(path, rel)`` of ``files``, in order, one stage at a
    time: every file loaded, then every loaded model analysed. The results are the same as
    file by file (each file's own error stays its own); a stage's code and data stay in the
    processor's caches across the files, which costs about a sixth less time per small model
    file than alternating stages (measured on 2,000 files of 2-12 states: 645 against 555
    µs per file). A third item of ``(path, rel, content)`` is the file's bytes when read
    already (see :func:`eigengate.load.loader.load_models_with_refs`)."""
    from ..load.loader import load_models_with_refs, real_folder

    if root is None and config is not None:
        root = config.root
    loaded: list = []
    for path, rel, *read in files:
        allow = False
        if config is not None:
            if rel is None:
                import os

                rel = os.path.relpath(os.path.realpath(path),
                                      real_folder(os.fspath(config.root)))
                rel = rel.replace(os.sep, "/")
            allow = config.policy_for(rel).allow_python
        try:
            loaded.append(load_models_with_refs(path, root=root, allow_python=allow,
                                                content=read[0] if read else None))
        except ModelError as exc:
            loaded.append(exc)
    out: list = []
    for item in loaded:
        if isinstance(item, ModelError):
            out.append((item.source, (), item, []))
            continue
        models, refs = item
        try:
            out.append((models[0].source, tuple([analyse_model(m, config) for m in models]),
                        None, refs))
        except ModelError as exc:
            out.append((exc.source, (), exc, []))
    return out


def check_file(path: str | Path, root: str | Path | None = None,
               config: "Config | None" = None, on: "datetime.date | None" = None
               ) -> FileResult:
    """Load every operating point of a model file and check it; a bad file becomes one
    invalid-model finding instead of an exception. Expired and unused waivers written in the
    file are findings of the file."""
    source, results, error, _ = analyse_file(path, root, config)
    return file_result(source, results, error, config, on)


def discover_model_files(paths: Sequence[str | Path], config: "Config | None" = None,
                         *, filter_named: bool = False) -> list[Path]:
    """Expand folders into the model files below them (see
    :func:`eigengate.scan.discovery.find_model_files`)."""
    from .discovery import find_model_files

    return [Path(f.path) for f in find_model_files(paths, config, filter_named=filter_named)]


def check_paths(paths: Iterable[str | Path], root: str | Path | None = None,
                config: "Config | None" = None, on: "datetime.date | None" = None
                ) -> list[FileResult]:
    """Check every model file under ``paths``; one bad file never stops the others."""
    return [check_file(f, root=root, config=config, on=on)
            for f in discover_model_files(list(paths), config)]


def unselected_findings(config: "Config", rels: Sequence[str]) -> list[Finding]:
    """One EG004 finding per model file (found by its ``model_format`` key) that the include
    patterns do not select, with a pattern that would."""
    from ..rules.catalogue import RULES

    rule = "EG004"
    out = []
    for rel in rels:
        policy = config.policy_for(rel)
        if not policy.rule_enabled(rule):
            continue
        where = policy.source or "pyproject.toml"
        out.append(Finding(
            rule=rule, name=RULES[rule].name, severity=policy.severity_of(rule), source=rel,
            line=None, model="", label=None, requirement="include",
            message=f"{rel} declares model_format but no include pattern of {where} selects "
                    f"it: it is not checked",
            suggestion=f"add \"{policy.suggest_include(rel)}\" to include, or the file to "
                       f"exclude to leave it out on purpose"))
    return out


def policy_findings(config: "Config", results: Sequence[FileResult],
                    on: "datetime.date | None" = None, *, complete: bool = True
                    ) -> list[Finding]:
    """Expired and unused waivers of the repository policy, judged over a run; a run of part
    of the repository (not ``complete``) judges as unused only the waivers whose scope it
    fully checked (:func:`eigengate.rules.waivers.scope_checked`)."""
    from ..rules.waivers import scope_checked, today, waiver_findings

    used = [w for fr in results for w in fr.used_waivers]
    checked = [fr.source for fr in results if fr.error is None]
    listed: list[str] = []

    def repository() -> list[str]:
        if not listed:
            from .discovery import find_model_files

            listed.extend(f.rel for f in find_model_files([config.root], config))
        return listed

    def judged(w) -> bool:
        return scope_checked(w, checked, complete, repository)

    # each policy's own waivers (a nested policy's are resolved within its folder)
    return [f for policy in config.policies()
            for f in waiver_findings(policy.waivers, used, on or today(), judged=judged,
                                     warning_days=policy.waiver_warning_days)]
