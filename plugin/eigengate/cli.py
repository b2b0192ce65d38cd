"""Command line: check a repository's models, show one model, list and explain the rules.

``main(argv) -> int`` is importable and testable in-process; ``eigengate`` and
``python -m eigengate`` call it. Exit status: 0 clean, 1 findings, 2 usage, configuration or
internal error.
"""

from __future__ import annotations

import argparse
import contextlib
import enum
import os
import sys
from pathlib import Path
from typing import Sequence

__all__ = ["main", "run", "Exit", "FORMATS"]

COMMANDS = ("check", "show", "rules", "explain", "baseline")
#: Output formats: name → (module, function, takes tool_version).
FORMATS = {
    "text": ("reports.text", "render_results", False),
    "json": ("reports.json", "render_json", True),
    "sarif": ("reports.sarif", "render_sarif", True),
    "junit": ("reports.junit", "render_junit", False),
    "markdown": ("reports.markdown", "render_markdown", False),
    "annotations": ("reports.annotations", "render_annotations", False),
    "html": ("reports.html", "render_html", True),
}


class Exit(enum.IntEnum):
    CLEAN = 0
    FINDINGS = 1
    USAGE = 2


class UsageError(Exception):
    """A command-line mistake: printed as one line, exit status 2."""


class OutputError(UsageError):
    """A report that cannot be written (folder missing or outside the repository, no
    permission, disk full): one line, exit status 2."""


#: Exit status when standard output is closed by its reader (``| head``): what a shell
#: reports for a program stopped by SIGPIPE (128 + 13); never 0, as the report was cut off.
CLOSED_PIPE = 141


class _Parser(argparse.ArgumentParser):
    """argparse's parser, its help as wide as the terminal, found without importing shutil
    (whose compression modules cost a check of an unchanged repository a tenth of its time)."""

    def _get_formatter(self):
        try:
            columns = int(os.environ.get("COLUMNS", ""))
        except ValueError:
            columns = 0
        if columns <= 0:
            try:
                columns = os.get_terminal_size(sys.__stdout__.fileno()).columns
            except (AttributeError, ValueError, OSError):
                columns = 0
        # as shutil.get_terminal_size (80 when unknown) and argparse.HelpFormatter make it
        return self.formatter_class(prog=self.prog, width=(columns if columns > 0 else 80) - 2)


def _parser() -> argparse.ArgumentParser:
    from .version import __version__

    p = _Parser(
        prog="eigengate",
        description="Check the stability requirements of control-system model files. An "
                    "engineering aid for model regression checks, not a safety sign-off.")
    p.add_argument("--version", action="version", version=f"eigengate {__version__}")
    sub = p.add_subparsers(dest="command", metavar="COMMAND")

    check = sub.add_parser("check", help="check every model file of the repository (default)",
                           description="Find the configured model files (or the ones below "
                                       "PATH), analyse them, evaluate requirements and policy, "
                                       "and report findings.")
    check.add_argument("paths", nargs="*", metavar="PATH",
                       help="model files or folders (default: the repository root)")
    _config_arg(check)
    check.add_argument("--format", "-f", default="text", choices=sorted(FORMATS),
                       help="format written to standard output (default: text)")
    check.add_argument("--output", "-o", action="append", default=[], metavar="FORMAT:FILE",
                       help="also write a report to FILE, e.g. sarif:eigengate.sarif "
                            "(repeatable)")
    check.add_argument("--pole-maps", metavar="DIR", default=None,
                       help="write PNG and SVG pole maps of every model with findings into DIR "
                            "(needs the report extra: pip install \"eigengate[report]\")")
    check.add_argument("--figures", metavar="DIR", default=None,
                       help="write the Bode, Nyquist and vector-field pictures of every model "
                            "that has them into DIR (needs the report extra)")
    check.add_argument("--figure-format", choices=("png", "svg"), default="png",
                       help="file format of --figures (default: png)")
    check.add_argument("--jobs", "-j", type=int, default=None, metavar="N",
                       help="processes that analyse at once, this one included "
                            "(default: the number of cores)")
    _cluster_args(check)
    check.add_argument("--no-cache", action="store_true",
                       help="neither read nor write the result cache")
    check.add_argument("--color", choices=("auto", "always", "never"), default="auto",
                       help="colour in text output (default: auto, only on a terminal; "
                            "NO_COLOR is respected)")
    check.add_argument("--only-model-files", action="store_true",
                       help="skip named files that are not model files (for hooks that pass "
                            "every changed file)")
    check.add_argument("--changed-files", action="store_true",
                       help="the PATHs are files a commit changed (for hooks): check the model "
                            "files among them and the models that use the others (matrix "
                            "files, vector-field modules); a policy change checks everything")
    check.add_argument("--against", metavar="REV", default=None,
                       help="compare with the models as they were at git revision REV (for "
                            "example the merge base of a pull request) instead of the stored "
                            "baseline")
    check.add_argument("--no-baseline", action="store_true",
                       help="do not compare with any baseline")
    check.add_argument("-q", "--quiet", action="store_true",
                       help="text output: findings only, not the requirements that passed")

    base = sub.add_parser("baseline", help="accept the current models as the baseline",
                          description="Manage the baseline: the accepted modes every later "
                                      "check compares with.")
    base_sub = base.add_subparsers(dest="action", metavar="ACTION", required=True)
    accept = base_sub.add_parser("accept", help="write the current models into the baseline",
                                 description="Analyse the model files (all of them, or those "
                                             "below PATH) and write their modes into the "
                                             "baseline file, removing entries of models that "
                                             "are gone.")
    accept.add_argument("paths", nargs="*", metavar="PATH",
                        help="model files or folders (default: the repository root)")
    _config_arg(accept)
    accept.add_argument("--jobs", "-j", type=int, default=None, metavar="N",
                        help="processes that analyse at once, this one included "
                             "(default: the number of cores)")
    _cluster_args(accept)

    show = sub.add_parser("show", help="show one model: modes, equilibrium and every verdict")
    show.add_argument("path", metavar="FILE", help="a model file")
    show.add_argument("--label", default=None, help="only this operating point")
    _config_arg(show)

    sub.add_parser("rules", help="list the rules with their ids, keys and units")
    explain = sub.add_parser("explain", help="explain one rule")
    explain.add_argument("rule", metavar="RULE", help="a rule id (EG103) or name")
    return p


def _config_arg(p: argparse.ArgumentParser) -> None:
    p.add_argument("--config", metavar="FILE", default=None,
                   help="configuration file (default: the nearest pyproject.toml with a "
                        "[tool.eigengate] table, or eigengate.toml)")


def _cluster_args(p: argparse.ArgumentParser) -> None:
    where = p.add_mutually_exclusive_group()
    where.add_argument("--cluster", metavar="ADDRESS", default=None,
                       help="analyse on the workers of the Dask scheduler at ADDRESS, e.g. "
                            "tls://scheduler:8786 (default: [tool.eigengate] cluster; needs "
                            "pip install \"eigengate[cluster]\" and the repository at the "
                            "same path on every worker)")
    where.add_argument("--no-cluster", action="store_true",
                       help="analyse here even when the policy names a cluster")


def _cluster(args, config) -> str | None:
    """The Dask scheduler to analyse on: --cluster, else the policy's ``cluster``, unless
    --no-cluster; refused beside --jobs (the workers of a cluster are its own)."""
    from .scan.config import cluster_address

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


def _normalise(argv: list[str]) -> list[str]:
    """``eigengate [options] [PATH...]`` means ``eigengate check ...``."""
    if not argv or (argv[0] not in COMMANDS and argv[0] not in ("-h", "--help", "--version")):
        return ["check", *argv]
    return argv


def main(argv: Sequence[str] | None = None) -> int:
    """Run the command line; return the exit status."""
    from .scan.config import ConfigError

    parser = _parser()
    try:
        args = parser.parse_args(_normalise(list(sys.argv[1:] if argv is None else argv)))
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
    from .scan.config import ConfigError, load_config

    try:
        return load_config(Path(args.config) if args.config else None, start=start,
                           defer=defer)
    except ConfigError as exc:
        raise UsageError(str(exc)) from None


def _complete(config):
    """The configuration with what loading deferred parsed (UsageError as loading)."""
    from .scan.config import ConfigError

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

    from .version import __version__

    module, name, versioned = FORMATS[fmt]
    func = getattr(importlib.import_module(f".{module}", __package__), name)
    if fmt == "text":
        return func(results, verbose=not quiet, color=color)
    if fmt == "markdown":
        return func(results, accept=accept, improvements=improvements)
    if fmt == "html":
        from .scan.runner import terminal_progress

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


def _write_pole_maps(folder: Path, files: list, baseline_poles, root: Path | None = None
                     ) -> int:
    """PNG and SVG pole maps of every model with findings, named after file and model."""
    from .reports.pictures import pole_map_files

    return _write_files(folder, pole_map_files(files, baseline_poles), root, "pole maps")


def _write_files(folder: Path, items, root: Path | None, what: str) -> int:
    """Write ``(file name, bytes)`` items into ``folder`` (made inside the repository only);
    the names are plain (no folders), and a link in their place is not followed."""
    where = f"{what} to {os.fspath(folder)!r}"
    try:
        _make_folder(folder, root, where)
        count = 0
        for name, data in items:
            path = folder / name
            if path.is_symlink():
                raise OutputError(f"cannot write {where}: {name} is a link")
            path.write_bytes(data)
            count += 1
    except OSError as exc:
        raise OutputError(f"cannot write {where}: {exc.strerror or exc}") from None
    return count


def _make_folder(folder: Path, root: Path | None, what: str) -> None:
    """Create ``folder`` for an output, refusing to create folders outside the repository."""
    if folder.is_dir():
        return
    if root is not None:
        # The folders that would be made, each resolved as far as it exists.
        new = Path(os.path.realpath(folder.absolute()))
        if not new.is_relative_to(os.path.realpath(root)):
            raise OutputError(f"cannot write {what}: folder {os.fspath(folder)!r} does not "
                              "exist, and eigengate creates folders only inside the "
                              "repository")
    folder.mkdir(parents=True, exist_ok=True)


def _write_atomic(path: Path, text: str, root: Path | None = None, what: str = "") -> None:
    import tempfile

    what = what or f"to {os.fspath(path)!r}"
    try:
        _make_folder(path.parent, root, what)
        fd, tmp = tempfile.mkstemp(prefix=f".{path.name}.", dir=path.parent)
        try:
            with os.fdopen(fd, "w", encoding="utf-8", newline="\n") as fh:
                fh.write(text)
            umask = os.umask(0)
            os.umask(umask)
            os.chmod(tmp, 0o666 & ~umask)  # a report is an ordinary file, not mkstemp's
            os.replace(tmp, path)
        except BaseException:
            with contextlib.suppress(OSError):
                os.unlink(tmp)
            raise
    except OSError as exc:
        raise OutputError(f"cannot write {what}: {exc.strerror or exc}") from None


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
        from .scan.dependents import changed_scope

        scope = changed_scope(args.paths, config, use_cache=not args.no_cache)
        paths, complete = list(scope.paths), scope.everything
        if not paths:
            return Exit.CLEAN  # nothing the commit changed is used by a model
    from .scan.engine import FileResult
    from .scan.runner import scan, terminal_progress

    result = scan(paths, config, jobs=args.jobs, use_cache=not args.no_cache,
                  progress=terminal_progress(), filter_named=args.only_model_files,
                  complete=complete, cluster=_cluster(args, config), memo=memo)
    files = list(result.files)
    notes = []
    failed = result.failed
    poles = None
    accept_cmd, improvements = None, []
    if not args.no_baseline:
        from .scan.baseline_check import accept_command, compare_files, with_regressions

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
    from .reports.figures import ReportDependencyError

    try:
        for fmt, path in outputs:
            _write_atomic(path, render(fmt, files, baseline_poles=poles, accept=accept_cmd,
                                       improvements=improvements), config.root,
                          f"the {fmt} report to {os.fspath(path)!r}")
        if args.pole_maps:
            _write_pole_maps(Path(args.pole_maps), files, poles, config.root)
        if args.figures:
            from .reports.pictures import picture_files

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
    from .scan.report_memo import ReportMemo

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
    from .scan.baseline_check import has_baseline

    if against is None and not has_baseline(config):
        return None  # no baseline accepted yet: nothing to read (nor its modules to import)
    from .baseline.store import BaselineError
    from .scan.baseline_check import reference_baseline
    from .scan.gitrev import GitError

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
    from .baseline.store import BaselineError
    from .scan.baseline_check import accept
    from .scan.runner import scan

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
    from .scan.engine import check_file
    from .reports.text import render_model

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
    from .rules.catalogue import RULES

    rows = [(r.id, r.name, r.key or "–", r.unit or "–", r.severity)
            for r in sorted(RULES.values(), key=lambda r: r.id)]
    head = ("rule", "name", "key", "unit", "default severity")
    widths = [max(len(row[i]) for row in (head, *rows)) for i in range(len(head))]
    for row in (head, *rows):
        print("  ".join(c.ljust(w) for c, w in zip(row, widths)).rstrip())
    return Exit.CLEAN


def _explain(name: str) -> int:
    from .rules.catalogue import RULES, explain_rule

    rule = RULES.get(name.upper()) or next((r for r in RULES.values() if r.name == name), None)
    if rule is None:
        import difflib

        close = difflib.get_close_matches(name, [*RULES, *(r.name for r in RULES.values())], 1)
        raise UsageError(f"no rule {name!r}" + (f" (did you mean {close[0]!r}?)" if close else
                                                 "; `eigengate rules` lists them"))
    print(explain_rule(rule))
    return Exit.CLEAN


def run() -> None:
    """Console-script entry point."""
    status = main()
    import gc  # the collection at exit would scan all the run made: a fifth of a warm check

    gc.freeze()  # (not in main, which tests call in-process)
    sys.exit(status)
