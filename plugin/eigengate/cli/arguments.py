"""The command line's arguments: its commands, report formats and options."""

from __future__ import annotations

import argparse
import os
import sys

__all__ = ["COMMANDS", "FORMATS"]

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


class _untranslated:
    """While the command line is parsed, argparse's own messages looked up in no catalogue
    when the current text domain has none (the usual case: Python ships none), which is what
    the lookup would find each time: the messages as written. argparse asks for each of its
    21 messages separately, and each lookup searches the locale folders again (measured:
    0.4 ms of a 35 ms check of an unchanged repository with ``LANG=C.UTF-8``, more where the
    locale names more folders)."""

    def __enter__(self) -> None:
        import gettext

        domain = gettext.textdomain()
        self.saved: tuple | None = None
        if gettext.find(domain, gettext.bindtextdomain(domain)) is None:
            self.saved = vars(argparse)["_"], vars(argparse)["ngettext"]
            vars(argparse).update(_=str, ngettext=_plural)

    def __exit__(self, *exc) -> None:
        if self.saved is not None:
            vars(argparse).update(_=self.saved[0], ngettext=self.saved[1])


def _plural(singular: str, plural: str, n: int) -> str:
    """``gettext.ngettext`` where no catalogue translates: the English rule."""
    return singular if n == 1 else plural


def _parser() -> argparse.ArgumentParser:
    from ..version import __version__

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


def _normalise(argv: list[str]) -> list[str]:
    """``eigengate [options] [PATH...]`` means ``eigengate check ...``."""
    if not argv or (argv[0] not in COMMANDS and argv[0] not in ("-h", "--help", "--version")):
        return ["check", *argv]
    return argv
