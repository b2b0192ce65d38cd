"""Command line: check a repository's models, show one model, list and explain the rules.

``main(argv) -> int`` is importable and testable in-process; ``eigengate`` and
``python -m eigengate`` call it. Exit status: 0 clean, 1 findings, 2 usage, configuration or
internal error.
"""

from __future__ import annotations

import os
import sys
from pathlib import Path

from .arguments import (COMMANDS, FORMATS, _normalise, _parser,  # noqa: F401 (re-exported)
                        _untranslated)
from .files import _make_folder, _write_atomic, _write_files, _write_pole_maps  # noqa: F401
from .status import CLOSED_PIPE, Exit, OutputError, UsageError  # noqa: F401 (re-exported)

TYPE_CHECKING = False  # typing.TYPE_CHECKING, without importing typing at run time
if TYPE_CHECKING:  # pragma: no cover - names for annotations only
    from typing import Sequence

__all__ = ["main", "run", "Exit", "FORMATS"]


def _cluster(args, config) -> str | None:
    """The Dask scheduler to analyse on: --cluster, else the policy's ``cluster``, unless
    --no-cluster; refused beside --jobs (the workers of a cluster are its own)."""
    from ..scan.config import cluster_address

    if args.no_cluster:
        return None
    if args.cluster is not None:
        try:
            address = cluster_address(args.cluster)
        except ValueError as exc:
            raise UsageError(f"--cluster {exc}") from None
    else:
        address = config.cluster
    if address is not None and args.jobs is not None:
        whence = "--cluster" if args.cluster is not None else \
            f"the cluster of {config.source or 'the policy'}"
        raise UsageError(f"--jobs is for a local run and cannot go with {whence}; add "
                         "--no-cluster to analyse here")
    return address


def main(argv: Sequence[str] | None = None) -> int:
    """Run the command line; return the exit status."""
    from ..scan.config import ConfigError

    try:
        with _untranslated():
            args = _parser().parse_args(
                _normalise(list(sys.argv[1:] if argv is None else argv)))
    except SystemExit as exc:  # argparse: --help/--version (0) and usage errors (2)
        return int(exc.code or 0)
    try:
        status = _command(args)
        sys.stdout.flush()  # here, where a closed pipe can still be handled
        return status
    except BrokenPipeError:
        return _closed_pipe()
    except UsageError as exc:
        print(f"eigengate: error: {exc}", file=sys.stderr)
        return Exit.USAGE
    except ConfigError as exc:  # a nested policy, met during the scan
        print(f"eigengate: error: {exc}", file=sys.stderr)
        return Exit.USAGE
    except KeyboardInterrupt:  # pragma: no cover - interactive
        print("eigengate: interrupted", file=sys.stderr)
        return Exit.USAGE
    except Exception as exc:  # an eigengate bug: one line, the traceback on request
        if _cluster_error(exc):  # not installed, not reachable, no workers, connection lost
            print(f"eigengate: error: {exc}", file=sys.stderr)
            return Exit.USAGE
        if os.environ.get("EIGENGATE_DEBUG"):
            raise
        print(f"eigengate: internal error: {type(exc).__name__}: {exc} (set EIGENGATE_DEBUG=1 "
              "for the traceback, and please report it)", file=sys.stderr)
        return Exit.USAGE


def _command(args) -> int:
    if args.command == "rules":
        return _rules()
    if args.command == "explain":
        return _explain(args.rule)
    if args.command == "show":
        return _show(args)
    if args.command == "baseline":
        return _accept(args)
    return _check(args)


def _closed_pipe() -> int:
    """Standard output's reader has gone: point stdout at devnull so that the interpreter's
    final flush does not fail again, and stop without a word."""
    try:
        devnull = os.open(os.devnull, os.O_WRONLY)
        os.dup2(devnull, sys.stdout.fileno())
        os.close(devnull)
    except (OSError, ValueError):  # pragma: no cover - stdout without a file descriptor
        pass
    return CLOSED_PIPE


def _config_start(paths: Sequence[str]) -> Path:
    """Where to look for the configuration: the first named folder, or the folder of the
    first named file (a link is not followed: its repository is the one it lies in)."""
    if not paths:
        return Path.cwd()
    first = Path(paths[0])
    return first if first.is_dir() else first.absolute().parent


def _missing(paths: Sequence[str]) -> None:
    # lexists: a broken or looping link is still a named file, reported as a finding
    gone = [p for p in paths if not os.path.lexists(p)]
    if gone:
        raise UsageError(f"no such file or folder: {', '.join(gone)}")


def _load_config(args, start: Path, *, defer: bool = False):
    from ..scan.config import ConfigError, load_config

    try:
        return load_config(Path(args.config) if args.config else None, start=start,
                           defer=defer, remember=defer and not args.no_cache)
    except ConfigError as exc:
        raise UsageError(str(exc)) from None


def _complete(config):
    """The configuration with what loading deferred parsed (UsageError as loading)."""
    from ..scan.config import ConfigError

    try:
        return config.complete()
    except ConfigError as exc:
        raise UsageError(str(exc)) from None


def _outputs(specs: list[str]) -> list[tuple[str, Path]]:
    out = []
    for spec in specs:
        fmt, sep, file = spec.partition(":")
        if not sep or not file or fmt not in FORMATS:
            raise UsageError(f"--output wants FORMAT:FILE with FORMAT one of "
                             f"{', '.join(sorted(FORMATS))}, got {spec!r}")
        out.append((fmt, Path(file)))
    return out


def render(fmt: str, results: list, *, color: bool = False, quiet: bool = False,
           baseline_poles=None, accept: str | None = None,
           improvements: Sequence[str] = ()) -> str:
    """Render ``results`` (FileResult objects) in ``fmt`` (the Markdown comment also shows
    the ``accept`` command and the ``improvements``)."""
    import importlib

    from ..version import __version__

    module, name, versioned = FORMATS[fmt]
    func = getattr(importlib.import_module(f"..{module}", __package__), name)
    if fmt == "text":
        return func(results, verbose=not quiet, color=color)
    if fmt == "markdown":
        return func(results, accept=accept, improvements=improvements)
    if fmt == "html":
        from ..scan.runner import terminal_progress

        return func(results, tool_version=__version__, baseline_poles=baseline_poles,
                    progress=terminal_progress())
    return func(results, tool_version=__version__) if versioned else func(results)


def _baseline_poles(baseline) -> dict:
    """Poles of every baseline entry in its model's own plane, conjugates and multiplicity
    included, for drawing the modes that moved."""
    out = {}
    for entry in baseline.entries():
        poles = []
        for m in entry.modes:
            for _ in range(m.multiplicity):
                poles.append(m.eigenvalue)
                if m.pair:
                    poles.append(m.eigenvalue.conjugate())
        out[entry.key] = poles
    return out


def _use_color(choice: str) -> bool:
    if choice != "auto":
        return choice == "always"
    return sys.stdout.isatty() and not os.environ.get("NO_COLOR")


def _check(args) -> int:
    outputs = _outputs(args.output)
    if not args.changed_files:  # a deleted file is a change like any other
        _missing(args.paths)
    if args.jobs is not None and args.jobs < 1:
        raise UsageError(f"--jobs must be at least 1, got {args.jobs}")
    # the requirements table is parsed only when the report memo cannot answer
    config = _load_config(args, _config_start(args.paths), defer=True)
    paths, complete = args.paths or [config.root], not args.paths
    cluster = _cluster(args, config)  # its options checked before anything is answered
    memo = _memo(args, outputs, config, paths, complete)
    if memo is not None:
        again = memo.replay(paths, filter_named=args.only_model_files)
        if again is not None:  # nothing changed since a check recorded its report
            out, err, status = again
            sys.stdout.write(out)
            sys.stderr.write(err)
            return status
    _complete(config)
    if args.changed_files and args.paths:
        from ..scan.dependents import changed_scope

        scope = changed_scope(args.paths, config, use_cache=not args.no_cache)
        paths, complete = list(scope.paths), scope.everything
        if not paths:
            return Exit.CLEAN  # nothing the commit changed is used by a model
    from ..scan.engine import FileResult
    from ..scan.runner import scan, terminal_progress

    result = scan(paths, config, jobs=args.jobs, use_cache=not args.no_cache,
                  progress=terminal_progress(), filter_named=args.only_model_files,
                  complete=complete, cluster=cluster, memo=memo)
    files = list(result.files)
    notes = []
    failed = result.failed
    poles = None
    accept_cmd, improvements = None, []
    if not args.no_baseline:
        from ..scan.baseline_check import accept_command, compare_files, with_regressions

        baseline = _reference(config, args.against)
        accept_cmd = accept_command(paths if args.changed_files else args.paths, args.config,
                                    files=files, root=config.root) \
            if args.against is None else None
        if baseline is not None:
            poles = _baseline_poles(baseline)
            outcome = compare_files(files, config, baseline, complete=complete)
            files = with_regressions(files, outcome, config)
            failed = failed or outcome.failed
            improvements = [f"{i.title} ({i.source}): {i.message}" for i in outcome.improvements]
            notes += [f"improved: {line}" for line in improvements]
            if outcome.new_keys or outcome.failed or outcome.stale_keys:
                what = []
                if outcome.new_keys:
                    what.append(_count(len(outcome.new_keys), "model") + " without a baseline "
                                "entry")
                if outcome.stale_keys:
                    what.append(_count(len(outcome.stale_keys), "stale entry", "stale entries"))
                if outcome.failed:
                    what.append("regressions")
                if accept_cmd is not None:
                    notes.append(f"baseline {config.baseline}: {', '.join(what)}; after review, "
                                 f"accept the current models with: {accept_cmd}")
                elif args.against is None:
                    notes.append(f"baseline {config.baseline}: {', '.join(what)}")
        elif accept_cmd is not None and files:
            notes.append(f"no baseline yet ({config.baseline}); to accept the current models "
                         f"as the baseline: {accept_cmd}")
    if result.policy:
        files.append(FileResult(source=config.source or "pyproject.toml",
                                findings=result.policy))
    err = "" if files else ("eigengate: no model files found (configure [tool.eigengate] "
                            "include, or name the files; a model file has a model_format "
                            "key)\n")
    sys.stderr.write(err)
    from ..reports.figures import ReportDependencyError

    try:
        for fmt, path in outputs:
            _write_atomic(path, render(fmt, files, baseline_poles=poles, accept=accept_cmd,
                                       improvements=improvements), config.root,
                          f"the {fmt} report to {os.fspath(path)!r}")
        if args.pole_maps:
            _write_pole_maps(Path(args.pole_maps), files, poles, config.root)
        if args.figures:
            from ..reports.pictures import picture_files

            _write_files(Path(args.figures), picture_files(files, args.figure_format),
                         config.root, "figures")
        text = render(args.format, files, color=_use_color(args.color), quiet=args.quiet,
                      baseline_poles=poles, accept=accept_cmd, improvements=improvements)
    except ReportDependencyError as exc:
        raise UsageError(str(exc)) from None
    said = "".join(f"{note}\n" for note in notes)  # with the text report, or on stderr
    out = text + said if args.format == "text" else text
    sys.stdout.write(out)
    if args.format != "text":
        sys.stderr.write(said)
        err += said
    status = Exit.FINDINGS if failed else Exit.CLEAN
    if memo is not None:
        memo.record(out, err, status)
    return status


def _memo(args, outputs, config, paths, complete):
    """The report memo of a check that writes nothing but its report (None for one that
    writes files, bypasses the cache, or looks at git: those always run in full)."""
    if args.no_cache or outputs or args.pole_maps or args.figures or args.changed_files \
            or args.against is not None:
        return None
    from ..scan.report_memo import ReportMemo

    request = {"format": args.format, "quiet": args.quiet, "color": _use_color(args.color),
               "paths": [os.fspath(p) for p in paths], "complete": complete,
               "named": list(args.paths), "config": args.config, "cwd": os.getcwd(),
               "only_model_files": args.only_model_files, "no_baseline": args.no_baseline}
    return ReportMemo(config, request)


def _cluster_error(exc: BaseException) -> bool:
    """Whether ``exc`` is a ClusterError (only raised once scan.cluster was imported: a local
    run does not import it)."""
    cluster = sys.modules.get("eigengate.scan.cluster")
    return cluster is not None and isinstance(exc, cluster.ClusterError)


def _reference(config, against: str | None):
    from ..scan.baseline_check import has_baseline

    if against is None and not has_baseline(config):
        return None  # no baseline accepted yet: nothing to read (nor its modules to import)
    from ..baseline.store import BaselineError
    from ..scan.baseline_check import reference_baseline
    from ..scan.gitrev import GitError

    try:
        return reference_baseline(config, against)
    except BaselineError as exc:
        raise UsageError(_baseline_message(exc, config)) from None
    except GitError as exc:
        raise UsageError(str(exc)) from None


def _baseline_message(exc, config) -> str:
    """A BaselineError's text with its file relative to the repository."""
    path = exc.path
    if os.path.isabs(path):
        rel = os.path.relpath(path, config.root)
        path = path if rel.startswith("..") else rel.replace(os.sep, "/")
    where = path if exc.line is None else f"{path}:{exc.line}"
    return f"{where}: {exc.problem}" + (f" ({exc.hint})" if exc.hint else "")


def _count(n: int, one: str, many: str | None = None) -> str:
    return f"{n} {one if n == 1 else many or one + 's'}"


def _accept(args) -> int:
    from ..baseline.store import BaselineError
    from ..scan.baseline_check import accept
    from ..scan.runner import scan

    _missing(args.paths)
    config = _load_config(args, _config_start(args.paths))
    result = scan(args.paths or [config.root], config, jobs=args.jobs,
                  cluster=_cluster(args, config))
    broken = [fr for fr in result.files if fr.error is not None]
    try:
        summary = accept(result.files, config, complete=not args.paths)
    except BaselineError as exc:
        raise UsageError(_baseline_message(exc, config)) from None
    for error in (fr.error for fr in broken if fr.error is not None):
        print(f"not accepted (invalid model file): {error.render()}", file=sys.stderr)
    print(f"baseline {config.baseline}: {len(summary.added)} added, {len(summary.changed)} "
          f"changed, {len(summary.removed)} removed, {len(summary.unchanged)} unchanged"
          + ("" if summary.written else " (file unchanged)"))
    return Exit.FINDINGS if broken else Exit.CLEAN


def _show(args) -> int:
    from ..scan.engine import check_file
    from ..reports.text import render_model

    path = Path(args.path)
    if not path.is_file():
        raise UsageError(f"no such model file: {args.path}")
    config = _load_config(args, _config_start([args.path]))
    fr = check_file(path, config=config)
    if fr.error is not None:
        print(fr.error.render())
        return Exit.FINDINGS
    results = [r for r in fr.results if args.label is None or r.model.label == args.label]
    if not results:
        labels = ", ".join(str(r.model.label) for r in fr.results)
        raise UsageError(f"{fr.source} has no operating point {args.label!r} (labels: {labels})")
    sys.stdout.write("\n".join(render_model(r) for r in results))
    return Exit.CLEAN if all(r.passed for r in results) else Exit.FINDINGS


def _rules() -> int:
    from ..rules.catalogue import RULES

    rows = [(r.id, r.name, r.key or "–", r.unit or "–", r.severity)
            for r in sorted(RULES.values(), key=lambda r: r.id)]
    head = ("rule", "name", "key", "unit", "default severity")
    widths = [max(len(row[i]) for row in (head, *rows)) for i in range(len(head))]
    for row in (head, *rows):
        print("  ".join(c.ljust(w) for c, w in zip(row, widths)).rstrip())
    return Exit.CLEAN


def _explain(name: str) -> int:
    from ..rules.catalogue import RULES, explain_rule

    rule = RULES.get(name.upper()) or next((r for r in RULES.values() if r.name == name), None)
    if rule is None:
        import difflib

        close = difflib.get_close_matches(name, [*RULES, *(r.name for r in RULES.values())], 1)
        raise UsageError(f"no rule {name!r}" + (f" (did you mean {close[0]!r}?)" if close else
                                                 "; `eigengate rules` lists them"))
    print(explain_rule(rule))
    return Exit.CLEAN


def run() -> None:
    """Console-script entry point: :func:`main`, from a frame with room below it
    (:func:`~eigengate.scan.stack_room.roomy_call`: measured, 35 to 50 ms less in a cold
    check), then the process ends at once (:func:`_leave`)."""
    from ..scan.stack_room import roomy_call

    _leave(roomy_call(main))


def _leave(status: int) -> None:
    """End the process with ``status`` once :func:`main` has written everything: standard
    output and error flushed, the exit handlers run (the cache's own among them), and then
    ``os._exit``, without taking apart the objects of the run one by one and the interpreter
    module by module, which nothing reads (measured: 10 to 20 ms of a cold check of 2,000
    small model files). Where that is not safe, the ordinary exit: another thread still
    running (a Dask client's, say), an interpreter without ``atexit._run_exitfuncs``, or a
    stream that cannot be flushed (then the ordinary exit reports it as it would)."""
    import atexit
    import gc

    gc.freeze()  # the ordinary exit's collection would scan all the run made
    run_exit = getattr(atexit, "_run_exitfuncs", None)
    threading = sys.modules.get("threading")  # (never imported: no thread started by it)
    if run_exit is None or (threading is not None and threading.active_count() > 1) \
            or not _flushed():
        sys.exit(status)
    run_exit()
    _flushed()  # what an exit handler wrote to a stream gone meanwhile is lost either way
    os._exit(int(status))


def _flushed() -> bool:
    """Flush standard output and error; False when either cannot be."""
    try:
        sys.stdout.flush()
        sys.stderr.flush()
    except (OSError, ValueError):
        return False
    return True
