"""Model files as they were at a git revision, turned into baseline entries.

Public API::

    revision_baseline(rev, root, *, config=None, against=None) -> RevisionSnapshot
    renames_since(rev, root, *, against=None) -> Renames
    resolve_revision(rev, root) -> str
    GitError

``revision_baseline("origin/main", root)`` lists the files of the revision
(``git ls-tree -r``), picks the model files the way a scan of the working tree does, reads
them and every matrix file they reference from the revision's objects (``git cat-file``; the
working tree is never consulted, and references stay confined to the repository), analyses
them and returns a :class:`~eigengate.baseline.store.Baseline` of entries in the same shape as the
stored baseline, so :func:`eigengate.baseline.regressions.compare_all` works the same on either.

Model files are loaded under the current policy. With ``allow_python`` on, a vector-field
model is linearised with its module *as it was at the revision*: the revision's ``.py`` files
below the configuration root are written from git objects (regular files only, never links,
at most :data:`PYTHON_TREE_LIMIT` bytes) into a private temporary folder, imported from
there, and taken out of ``sys.modules`` again afterwards, with the working tree's modules of
the same names put back (see ``docs/baselines.md``). A model file that cannot be loaded at
the revision is recorded in ``Baseline.unreadable`` (and ``errors``), so the comparison
reports it (EG210) instead of calling its models new.

Renames between the revision and the working tree (or ``against``, a second revision) come
from ``git diff --find-renames --name-status``: a renamed model file's entries are keyed by
its new path, and a model whose name came from its file name takes the new file's name, so
it compares against its old self. Deleted model files keep their old path and show up as
stale entries. git runs as a subprocess with an argument list (no shell); an unknown revision,
a missing git or a folder outside any repository is a :class:`GitError` saying which.
"""

from __future__ import annotations

import os
import subprocess
from dataclasses import dataclass
from pathlib import Path, PurePosixPath
from typing import TYPE_CHECKING

from ..errors import EigengateError, ModelError

if TYPE_CHECKING:  # pragma: no cover
    from ..baseline.store import Baseline
    from .config import Config

__all__ = ["GitError", "Renames", "RevisionSnapshot", "revision_baseline", "renames_since",
           "resolve_revision"]

_SYMLINK, _BLOB_MODES = "120000", ("100644", "100755")
#: Most bytes of Python source materialised from a revision for its vector-field models.
PYTHON_TREE_LIMIT = 32 << 20


class GitError(EigengateError, ValueError):
    """git could not answer: not a repository, unknown revision, or git missing."""

    def __init__(self, problem: str, hint: str | None = None) -> None:
        self.problem, self.hint = problem, hint
        super().__init__(problem + (f" ({hint})" if hint else ""))


@dataclass(frozen=True)
class Renames:
    """Paths (relative to the configuration root) renamed or deleted since a revision."""

    renamed: dict[str, str]
    deleted: tuple[str, ...]


@dataclass(frozen=True, eq=False)
class RevisionSnapshot:
    """The models of a revision as a baseline, with the renames and deletions since."""

    revision: str
    commit: str
    baseline: "Baseline"
    renamed: dict[str, str]
    deleted: tuple[str, ...]
    errors: tuple[ModelError, ...]


def _git(args: list[str], cwd: Path, what: str, *, input: bytes | None = None) -> bytes:
    env = {**os.environ, "LC_ALL": "C", "GIT_TERMINAL_PROMPT": "0", "GIT_OPTIONAL_LOCKS": "0"}
    try:
        done = subprocess.run(["git", *args], cwd=cwd, input=input, capture_output=True,
                              env=env, check=False)
    except FileNotFoundError:
        raise GitError(f"cannot {what}: git is not installed (or not on PATH)") from None
    except OSError as exc:
        raise GitError(f"cannot {what}: running git failed ({exc})") from None
    if done.returncode != 0:
        message = done.stderr.decode("utf-8", "replace").strip().splitlines()
        raise GitError(f"cannot {what}: git says: {message[-1] if message else done.returncode}")
    return done.stdout


def _top(root: Path) -> tuple[Path, str]:
    """The work tree's top folder and ``root`` relative to it ('' at the top)."""
    if not Path(root).is_dir():
        raise GitError(f"{os.fspath(root)} is not a folder")
    try:
        out = _git(["rev-parse", "--show-toplevel"], Path(root), "find the repository")
    except GitError:
        raise GitError(f"{os.fspath(root)} is not inside a git repository",
                       "run this in a clone, or pass the repository root") from None
    top = Path(out.decode("utf-8").strip())
    rel = Path(root).resolve().relative_to(top.resolve()).as_posix()
    return top, "" if rel == "." else rel


def resolve_revision(rev: str, root: str | os.PathLike[str]) -> str:
    """The full commit id ``rev`` names (a branch, tag, commit or ``HEAD~2``-style name)."""
    if not isinstance(rev, str) or not rev.strip() or rev.startswith("-") \
            or any(c in rev for c in "\0\n\r"):
        raise GitError(f"{rev!r} is not a revision name")
    top, _ = _top(Path(root))
    try:
        out = _git(["rev-parse", "--verify", "--quiet", f"{rev}^{{commit}}"], top,
                   f"resolve {rev!r}")
    except GitError:
        raise GitError(f"unknown revision {rev!r} in the repository at {top.name!r}",
                       "fetch it first; a shallow CI checkout may lack it (fetch-depth: 0)"
                       ) from None
    return out.decode("ascii").strip()


def _tree(commit: str, top: Path) -> dict[str, tuple[str, str, int]]:
    """``{path: (mode, object id, size)}`` of every file of ``commit`` (top-relative)."""
    out = _git(["ls-tree", "-r", "-l", "-z", "--full-tree", commit], top, "list the revision")
    files = {}
    for record in out.decode("utf-8", "surrogateescape").split("\0"):
        if not record:
            continue
        meta, path = record.split("\t", 1)
        mode, kind, oid, size = meta.split()
        if kind == "blob":
            files[path] = (mode, oid, int(size) if size.isdigit() else 0)
    return files


class _Blobs:
    """Object contents by id through one ``git cat-file --batch`` process, memoised."""

    def __init__(self, top: Path) -> None:
        self.top = top
        self.proc: subprocess.Popen[bytes] | None = None
        self.memo: dict[str, bytes] = {}

    def read(self, oid: str) -> bytes:
        if oid in self.memo:
            return self.memo[oid]
        if self.proc is None:
            try:
                self.proc = subprocess.Popen(["git", "cat-file", "--batch"], cwd=self.top,
                                             stdin=subprocess.PIPE, stdout=subprocess.PIPE,
                                             stderr=subprocess.DEVNULL,
                                             env={**os.environ, "LC_ALL": "C"})
            except OSError as exc:
                raise GitError(f"cannot read the revision's files: {exc}") from None
        assert self.proc.stdin is not None and self.proc.stdout is not None
        self.proc.stdin.write(oid.encode("ascii") + b"\n")
        self.proc.stdin.flush()
        header = self.proc.stdout.readline().split()
        if len(header) != 3:
            raise GitError(f"cannot read object {oid} of the revision: "
                           f"{b' '.join(header).decode('ascii', 'replace')}")
        data = self.proc.stdout.read(int(header[2]))
        self.proc.stdout.read(1)  # the newline after the contents
        self.memo[oid] = data
        return data

    def close(self) -> None:
        if self.proc is not None:
            assert self.proc.stdin is not None
            self.proc.stdin.close()
            self.proc.wait()
            if self.proc.stdout is not None:
                self.proc.stdout.close()
            self.proc = None


class _PythonTree:
    """The revision's ``.py`` files below the configuration root, written on first use into a
    private temporary folder that vector-field modules are imported from. While it is open,
    the modules of the same top-level names are out of ``sys.modules`` (the working tree's
    are put back on closing, the revision's dropped), so neither side sees the other's."""

    def __init__(self, files: dict[str, tuple[str, str, int]], blobs: _Blobs, where: str
                 ) -> None:
        self.files, self.blobs, self.where = files, blobs, where
        self.folder: Path | None = None
        self.names: set[str] = set()
        self.stash: dict[str, object] = {}

    def root(self) -> Path:
        """The folder to import from, materialised on the first call; ModelError-free: a
        problem raises :class:`OSError` with its reason."""
        if self.folder is not None:
            return self.folder
        import sys
        import tempfile

        wanted = {rel: meta for rel, meta in self.files.items() if rel.endswith(".py")
                  and meta[0] in _BLOB_MODES and not any(
                      p in ("", ".", "..") or p.startswith(".") for p in rel.split("/"))}
        size = sum(meta[2] for meta in wanted.values())
        if size > PYTHON_TREE_LIMIT:
            raise OSError(f"the Python files of {self.where} total {size} bytes, over the "
                          f"{PYTHON_TREE_LIMIT} bytes eigengate materialises")
        folder = Path(tempfile.mkdtemp(prefix="eigengate-rev-"))
        self.folder = folder
        for rel, (_, oid, _) in sorted(wanted.items()):
            target = folder.joinpath(*rel.split("/"))
            target.parent.mkdir(parents=True, exist_ok=True)
            target.write_bytes(self.blobs.read(oid))
        # eigengate's own modules stay (a checkout of eigengate at a revision holds a folder
        # of that name: popping them would make a second copy of every class imported later)
        self.names = {rel.split("/")[0].removesuffix(".py") for rel in wanted} - {"eigengate"}
        for name in [n for n in sys.modules if n.split(".")[0] in self.names]:
            self.stash[name] = sys.modules.pop(name)
        return folder

    def close(self) -> None:
        if self.folder is None:
            return
        import importlib
        import shutil
        import sys

        for name in [n for n in sys.modules if n.split(".")[0] in self.names]:
            del sys.modules[name]
        sys.modules.update(self.stash)  # type: ignore[arg-type]
        shutil.rmtree(self.folder, ignore_errors=True)
        importlib.invalidate_caches()
        self.folder = None


def renames_since(rev: str, root: str | os.PathLike[str], *, against: str | None = None
                  ) -> Renames:
    """Model-file renames and deletions from ``rev`` to the working tree (or ``against``),
    as paths relative to ``root``; files outside ``root`` are left out."""
    top, prefix = _top(Path(root))
    commit = resolve_revision(rev, root)
    args = ["diff", "-z", "--find-renames", "--name-status", "--no-ext-diff", commit]
    if against is not None:
        args.append(resolve_revision(against, root))
    parts = _git(args + ["--"], top, f"compare {rev!r} with the working tree").decode(
        "utf-8", "surrogateescape").split("\0")
    renamed: dict[str, str] = {}
    deleted: list[str] = []
    i = 0
    while i < len(parts) and parts[i]:
        status = parts[i]
        if status[0] in "RC":
            old, new = _local(parts[i + 1], prefix), _local(parts[i + 2], prefix)
            if status[0] == "R" and old is not None and new is not None:
                renamed[old] = new
            elif status[0] == "R" and old is not None:
                deleted.append(old)  # moved out of the configured root
            i += 3
            continue
        if status[0] == "D" and _local(parts[i + 1], prefix) is not None:
            deleted.append(_local(parts[i + 1], prefix))  # type: ignore[arg-type]
        i += 2
    return Renames(renamed, tuple(sorted(deleted)))


def _local(path: str, prefix: str) -> str | None:
    if not prefix:
        return path
    return path[len(prefix) + 1:] if path.startswith(prefix + "/") else None


def _is_model(rel: str, oid: str | None, config: "Config | None", blobs: _Blobs) -> bool:
    """Whether the revision's file ``rel`` is a model file as a scan would pick it (a link,
    ``oid`` None, counts when the configuration selects its path)."""
    from .engine import MODEL_SUFFIXES

    parts = PurePosixPath(rel).parts
    if PurePosixPath(rel).suffix not in MODEL_SUFFIXES or rel.endswith("pyproject.toml") \
            or any(p.startswith(".") for p in parts):
        return False
    if config is not None:
        if not config.is_model_path(rel):
            return False
        if config.include:
            return True
    return oid is not None and b"model_format" in blobs.read(oid)[:65536]


def revision_baseline(rev: str, root: str | os.PathLike[str], *,
                      config: "Config | None" = None, against: str | None = None
                      ) -> RevisionSnapshot:
    """The model files of ``rev`` under ``root`` as a baseline (see the module docstring).

    Parameters
    ----------
    rev
        Any revision name git understands (a merge base, ``origin/main``, a tag).
    root
        The configuration root: model sources are relative to it, as in a scan.
    config
        Selects model files (include/exclude) like a scan; None takes every file with a
        ``model_format`` key.
    against
        Detect renames up to this revision instead of the working tree.

    Returns
    -------
    RevisionSnapshot
        The baseline (entries keyed by today's paths), the renames and deletions, and the
        load errors of model files that were broken at ``rev`` (those have no entries).
    """
    from ..baseline.store import Baseline, baseline_entry_from
    from .engine import analyse_model
    from ..load.loader import load_models_from_bytes

    root = Path(root)
    top, prefix = _top(root)
    commit = resolve_revision(rev, root)
    moves = renames_since(rev, root, against=against)
    files = {}
    for path, meta in _tree(commit, top).items():
        rel = _local(path, prefix)
        if rel is not None:
            files[rel] = meta
    blobs = _Blobs(top)
    short = commit[:12]
    python = _PythonTree(files, blobs, f"{rev} ({short})") \
        if config is not None and config.allow_python else None

    def read(rel: str) -> bytes:
        meta = files.get(rel)
        if meta is None:
            raise FileNotFoundError(rel)
        if meta[0] == _SYMLINK:
            raise OSError(f"it is a symbolic link in {rev} ({short}); links are not followed "
                          "in history")
        return blobs.read(meta[1])

    entries, errors, unreadable = [], [], {}
    try:
        for rel in sorted(files):
            mode, oid, _ = files[rel]
            new = moves.renamed.get(rel, rel)
            if mode == _SYMLINK and _is_model(rel, None, config, blobs):
                exc = ModelError(rel, "", f"is a symbolic link in {rev} ({short}); links are "
                                 "not followed in history, so its models were not compared")
                errors.append(exc)
                unreadable[new] = f"at {rev} ({short}): {exc.render()}"
                continue
            if mode not in _BLOB_MODES or not _is_model(rel, oid, config, blobs):
                continue
            try:
                raw = blobs.read(oid)
                where = None
                if python is not None and b"vector_field" in raw:
                    try:
                        where = python.root()
                    except OSError as exc:
                        raise ModelError(rel, "vector_field.function", f"cannot be imported "
                                         f"as it was in {rev} ({short}): {exc}") from None
                models, _ = load_models_from_bytes(raw, rel, read, stem=PurePosixPath(new).stem,
                                                   python_root=where)
                entries += [baseline_entry_from(analyse_model(m, config), source=new,
                                                written_by=f"git {short}") for m in models]
            except ModelError as exc:
                errors.append(exc)
                unreadable[new] = f"at {rev} ({short}): {exc.render()}"
    finally:
        if python is not None:
            python.close()
        blobs.close()
    return RevisionSnapshot(revision=rev, commit=commit,
                            baseline=Baseline(entries, path=f"{rev} ({short})",
                                              unreadable=unreadable),
                            renamed=moves.renamed, deleted=moves.deleted, errors=tuple(errors))
