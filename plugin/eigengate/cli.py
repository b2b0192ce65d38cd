"""Command line: ``eigengate check PATH...`` analyses model files and prints their verdicts."""

from __future__ import annotations

import argparse
import enum
import sys
from typing import Sequence

__all__ = ["main", "run", "Exit"]


class Exit(enum.IntEnum):
    CLEAN = 0
    FINDINGS = 1
    USAGE = 2


def _parser() -> argparse.ArgumentParser:
    from . import __version__

    p = argparse.ArgumentParser(
        prog="eigengate",
        description="Check the stability requirements of control-system model files. "
                    "An engineering aid for model regression checks, not a safety sign-off.")
    p.add_argument("--version", action="version", version=f"eigengate {__version__}")
    sub = p.add_subparsers(dest="command", metavar="COMMAND")
    check = sub.add_parser("check", help="analyse model files and report verdicts",
                           description="Analyse model files (or every model file below a "
                                       "folder) and report each requirement's verdict.")
    check.add_argument("paths", nargs="+", metavar="PATH", help="model file or folder")
    check.add_argument("--root", metavar="DIR", default=None,
                       help="repository root that referenced matrix files must stay inside "
                            "(default: nearest folder with .git or pyproject.toml)")
    check.add_argument("--config", metavar="FILE", default=None,
                       help="configuration file (default: the nearest pyproject.toml with a "
                            "[tool.eigengate] table, or eigengate.toml)")
    check.add_argument("-q", "--quiet", action="store_true",
                       help="print findings only, not the requirements that passed")
    return p


def main(argv: Sequence[str] | None = None) -> int:
    """Run the command line; return the exit code (0 clean, 1 findings, 2 usage error)."""
    parser = _parser()
    try:
        args = parser.parse_args(argv)
    except SystemExit as exc:  # argparse exits on --help/--version (0) and usage errors (2)
        return int(exc.code or 0)
    if args.command is None:
        parser.print_help(sys.stderr)
        return Exit.USAGE
    from pathlib import Path

    from .engine import check_paths
    from .report_text import render_results

    missing = [p for p in args.paths if not Path(p).exists()]
    if missing:
        print(f"eigengate: error: no such file or folder: {', '.join(missing)}", file=sys.stderr)
        return Exit.USAGE
    from .config import ConfigError, load_config

    try:
        config = load_config(Path(args.config) if args.config else None,
                             start=Path(args.paths[0]))
    except ConfigError as exc:
        print(f"eigengate: error: {exc}", file=sys.stderr)
        return Exit.USAGE
    results = check_paths(args.paths, root=args.root, config=config)
    if not results:
        print("eigengate: no model files found (a model file is .yaml/.yml/.toml/.json with "
              "a model_format key)", file=sys.stderr)
        return Exit.CLEAN
    sys.stdout.write(render_results(results, verbose=not args.quiet))
    failed = any(f.severity == "error" for r in results for f in r.findings)
    return Exit.FINDINGS if failed else Exit.CLEAN


def run() -> None:
    """Console-script entry point."""
    sys.exit(main())
