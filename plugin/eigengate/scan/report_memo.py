"""The report memo: a check of an unchanged repository answered by the report it gave last time.

A check's report is a function of its inputs alone (the same input gives the same bytes):
the command line, the working folder, the date waivers are judged on, the policies, the
baseline files, and the bytes of every model file and every file it references. After a
check that the result cache could record whole, the memo keeps, next to the cache pack, the
status records the cache kept for those files (size, modification and change times, inode:
recorded only when the file had not changed for two seconds before that check began) with
the report's text, the messages written to standard error and the exit status, under a hash
of all those inputs.

The next check asks first: it loads the configuration, discovers the model files (nested
policies included; as the last discovery found them when every folder it listed still
lists the same names and every file it looked at has the status it had), and takes each
file's key from its status record, each
referenced file's hash from its status record, and each non-model file's "no model_format"
answer from its record. When every one of them is answered by a record and the hash of the
inputs has a report, that report is written and nothing is read, parsed or analysed (numpy
is not even imported). Anything unanswered (a new, changed, touched or racy file, another
policy, another date, another baseline, other options) is a miss: the check runs as
usual, and records the memo afresh. A memo that fails its checksum, is too large, or is
not what it should be, is ignored and rewritten, never trusted.

Only checks that write nothing but their report take part: ``--no-cache``, ``--output``,
``--pole-maps``, ``--figures``, ``--changed-files`` and ``--against`` always run in full.
"""

from __future__ import annotations

import json
import os
import time
from pathlib import Path

from .cache_format import CACHE_DIR, FORMAT, cache_name as _name
from .checked_json import read_checked, write_checked
from .digests import hasher
from . import status_records
from .status_records import record_value, signature

TYPE_CHECKING = False  # typing.TYPE_CHECKING, without importing typing at run time
if TYPE_CHECKING:  # pragma: no cover - names for annotations only
    from typing import Any, Sequence
    from .cache import ResultCache
    from .config import Config

__all__ = ["ReportMemo"]

#: Version of the memo's own layout (inside a cache format).
MEMO_VERSION = 3  # 2: the discovery walk; 3: the digest of joined names
#: A memo file larger than this is neither written nor read.
MAX_BYTES = 64 << 20
#: Reports kept per configuration (for as many different command lines or dates), each in
#: a file of its own beside the memo of status records, read only when its inputs match.
KEEP = 8
_MAGIC = b"eigengate report memo\n"


class _Miss(Exception):
    """A question the memo's records do not answer: the check runs in full."""


class ReportMemo:
    """The memo of one configuration, for one check's command line (``request``: what of the
    command line and its surroundings shapes the report)."""

    def __init__(self, config: "Config", request: dict[str, Any]) -> None:
        from ..version import __version__

        self.config = config
        self.request = request
        salt = (f"eigengate {__version__}\0cache {FORMAT}\0memo {MEMO_VERSION}\0"
                f"config {config.digest}\0")
        self.salt = salt
        h = hasher(20)
        h.update(salt.encode())
        self.path = Path(config.root) / CACHE_DIR / f"v{FORMAT}" / f"{h.hexdigest()[:24]}.memo"
        self._seen: dict[str, Any] | None = None  # what observe() saw: written by record()
        self._started = time.time_ns()  # before any status is taken: the racy window's end

    # ------------------------------------------------------------------ reading
    def _report_path(self, digest: str) -> Path:
        return self.path.with_name(f"{self.path.stem}-{digest[:32]}.report")

    def _read(self) -> dict[str, Any] | None:
        data = read_checked(self.path, _MAGIC, MAX_BYTES)
        if type(data) is not dict or data.get("salt") != self.salt:
            return None
        for name in ("files", "refs", "sniff", "refs_of"):
            if type(data.get(name)) is not dict:
                return None
        outputs = data.get("outputs")
        if type(outputs) is not list or not all(type(d) is str for d in outputs):
            return None
        return data

    def replay(self, paths: Sequence[str | Path], *, filter_named: bool = False
               ) -> tuple[str, str, int] | None:
        """``(standard output, standard error, exit status)`` of the last check of these
        inputs, when every input is answered by a status record; None otherwise."""
        data = self._read()
        if data is None:
            return None
        files, sniff = data["files"], data["sniff"]

        class Records:
            @staticmethod
            def sniffed(rel: str, st: os.stat_result) -> bool | None:
                said = record_value(sniff.get(rel), st)
                if said is None:
                    raise _Miss
                return said == "model"

            @staticmethod
            def note_sniff(rel: str, st, is_model: bool) -> None:
                raise _Miss

        from .discovery import find_model_files

        unselected: list[str] = []
        known: dict[str, str] = {}  # the files answered by their status records: their keys
        policies: dict[str, Any] = {}  # folder → the policy that judges its files

        def name(rel: str) -> str:  # cache_name, its policy found once per folder
            folder = rel.rpartition("/")[0]
            policy = policies.get(folder)
            if policy is None:
                policy = policies[folder] = self.config.policy_for(rel)
            return rel if policy is self.config else f"{rel}\0{policy.digest}"

        def knows(rel: str, st: os.stat_result) -> bool:
            key = record_value(files.get(name(rel)), st)
            if key is not None:
                known[rel] = key
            return key is not None

        try:
            walked = self._walked(data.get("walk"), paths, filter_named)
            walk = None
            if walked is not None:  # every folder and candidate as it was: found the same
                found, unselected = walked
            else:
                from .discovery import Walk

                walk = Walk()
                found = find_model_files(
                    list(paths), self.config, filter_named=filter_named,
                    unselected=unselected, sniffs=Records(), known=knows, walk=walk)
            keys = []
            for f in found:
                key = None
                if f.content is None:  # (a named file was not asked of ``knows``)
                    key = known.get(f.rel) or record_value(files.get(name(f.rel)), f.stat)
                if key is None:
                    raise _Miss  # not recorded (new, changed, racy), or not readable
                keys.append(key)
            refs = {}
            for key in keys:
                names = data["refs_of"].get(key, [])  # recorded only when there are any
                if type(names) is not list:
                    raise _Miss
                for rel in names:
                    if rel not in refs:
                        try:
                            st = os.stat(Path(self.config.root) / rel)
                        except (OSError, TypeError, ValueError):
                            raise _Miss from None
                        digest = record_value(data["refs"].get(rel), st)
                        if digest is None:
                            raise _Miss
                        refs[rel] = digest
        except _Miss:
            return None
        digest = self._digest([f.rel for f in found], keys, unselected, refs)
        if digest not in data["outputs"]:
            return None
        row = read_checked(self._report_path(digest), _MAGIC, MAX_BYTES)
        if type(row) is list and len(row) == 4 and row[0] == digest and type(row[1]) is str \
                and type(row[2]) is str and type(row[3]) is int:
            if walk is not None:  # walked: kept for the next check, when it can be trusted
                record = self._walk_record(walk, [f.path for f in found],
                                           [f.rel for f in found], unselected)
                if record is not None:
                    write_checked(self.path, _MAGIC, MAX_BYTES, {**data, "walk": record})
            return row[1], row[2], row[3]
        return None

    def _walk_key(self) -> list:
        """What a discovery's walk depends on besides the statuses: the paths walked (as the
        request names them, from its working folder) and whether named files are tested."""
        r = self.request
        return [r.get("paths"), r.get("cwd"), r.get("only_model_files")]

    def _walked(self, walk: Any, paths: Sequence[str | Path], filter_named: bool):
        """``(found files, unselected model files)`` as the recorded discovery found them,
        when it walked the same paths, every folder it listed still lists the same names
        and every entry with a model suffix still has the status recorded (taken before it
        was read); None otherwise (a discovery runs). The nested policies are met as
        discovery meets them, so their digests count as before."""
        from .discovery import FoundFile, listed_names, walked_rel

        if type(walk) is not dict or walk.get("key") != self._walk_key() \
                or self._walk_key() != [[os.fspath(p) for p in paths], os.getcwd(),
                                        filter_named]:
            return None
        try:
            folders = walk["folders"]
            for path, _, names in folders:
                if listed_names(os.listdir(path)) != names:
                    return None  # an entry added, removed or renamed
            paths_of, rels, stats = [], [], []
            stat = os.stat
            prefixes = _prefixes(folders)
            met = set()  # the nested policies are per folder: one file of each asks
            for k, name, rel, sig in walk["files"]:
                at, below = prefixes[k]
                path = at + name
                st = stat(path)
                if sig is not None and \
                        sig != [st.st_size, st.st_mtime_ns, st.st_ctime_ns, st.st_ino]:
                    return None  # (signature(st), written out: asked of every file)
                if rel is None:  # (a printable folder and an ASCII name: printable)
                    rel = below + name if name.isascii() else walked_rel(folders[k][1], name)
                if k not in met and name != "pyproject.toml":
                    met.add(k)
                    self.config.policy_for(rel)  # (a nested policy's error as discovery's)
                paths_of.append(path)
                rels.append(rel)
                stats.append(st)
            found = [FoundFile(paths_of[i], rels[i], None, stats[i]) for i in walk["found"]]
            unselected = walk["unselected"]
            if not all(type(r) is str for r in unselected):
                return None
            return found, list(unselected)
        except (OSError, KeyError, TypeError, ValueError, IndexError):
            return None

    def _walk_record(self, walk, found: list[str], rels: list[str], unselected: list[str]
                     ) -> dict | None:
        """What :meth:`_walked` reads: None when the walk met a named file or a link, or a
        file whose status it could not take or cannot trust (changed within the racy
        window). A found file's status is not kept here: the "files" table has its record,
        which replaying compares."""
        from .discovery import walked_rel

        if walk is None or not walk.whole or len(found) != len(rels):
            return None
        limit = self._started - status_records.RACY_NS

        def trusted(st) -> bool:
            return st is not None and max(st.st_mtime_ns, st.st_ctime_ns) < limit

        if not all(trusted(st) for *_, st in walk.files):
            return None
        prefixes = _prefixes(walk.folders)
        index = {}
        files = []
        for i, (k, name, rel, st) in enumerate(walk.files):
            at, below = prefixes[k]
            index[at + name] = i
            usual = below + name if name.isascii() else walked_rel(walk.folders[k][1], name)
            files.append([k, name, None if rel == usual else rel, signature(st)])
        try:
            hits = [index[path] for path in found]
        except KeyError:
            return None  # found otherwise than by the walk
        for i in hits:
            files[i][3] = None
        if [walk.files[i][2] for i in hits] != list(rels):
            return None
        return {"key": self._walk_key(), "folders": [list(f) for f in walk.folders],
                "files": files, "found": hits, "unselected": list(unselected)}

    def _digest(self, rels: list[str], keys: list[str], unselected: list[str],
                refs: dict[str, str]) -> str:
        from ..rules.dates import today_iso

        baselines: list[list[Any]] = []
        for policy in self.config.policies():
            try:
                st = os.stat(policy.baseline_path)
                baselines.append([policy.base, policy.digest, signature(st)])
            except OSError:
                baselines.append([policy.base, policy.digest, None])
        h = hasher(20)
        # the small parts as JSON, with the lengths of the long lists, which follow as their
        # items each ended by a NUL (which no path or key holds): the same inputs make the
        # same text and other inputs another, and thousands of names are joined, not encoded
        h.update(json.dumps([self.request, today_iso(), len(rels), len(keys), len(unselected),
                             sorted(refs.items()), baselines],
                            separators=(",", ":")).encode())
        for names in (rels, keys, unselected):
            h.update(b"\n")
            h.update("\0".join(names).encode("utf-8", "surrogatepass"))
            h.update(b"\0")
        return h.hexdigest()

    # ------------------------------------------------------------------ recording
    def observe(self, rels: list[str], keys: list[str | None], unselected: list[str],
                cache: "ResultCache", walk=None, found: list[str] | None = None) -> None:
        """What a scan saw (called by it before the cache is saved): the model files found,
        their keys, the unselected model files, and the cache's status records. Nothing is
        recorded when an input has no status record (it changed too recently to trust one)
        or no result."""
        self._seen = None
        files: dict[str, list] = {}
        refs_of: dict[str, list[str]] = {}
        refs: dict[str, list] = {}
        names = [_name(self.config, rel) for rel in rels]
        for name, key in zip(names, keys):
            row = cache.status_row("files", name)
            entry_refs = cache.entry_refs(key) if key is not None else None
            if row is None or row[4] != key or entry_refs is None:
                return
            files[name] = row
            if entry_refs:
                refs_of[key] = sorted(entry_refs)  # type: ignore[index]
            for rel, digest in entry_refs.items():
                ref_row = cache.status_row("refs", rel)
                if ref_row is None or ref_row[4] != digest:
                    return
                refs[rel] = ref_row
        ref_hashes = {rel: row[4] for rel, row in refs.items()}
        self._seen = {"files": files, "refs": refs, "refs_of": refs_of,
                      "sniff": cache.status_table("sniff"),
                      "walk": self._walk_record(walk, found or [], rels, unselected),
                      "digest": self._digest(list(rels), keys, unselected,  # type: ignore[arg-type]
                                             ref_hashes)}

    def record(self, out: str, err: str, status: int) -> None:
        """Keep the report of the check whose scan :meth:`observe` saw; failures to write
        are ignored (the memo is optional, and a half-written one is never visible)."""
        seen = self._seen
        if seen is None:
            return
        digest = seen["digest"]
        if not write_checked(self._report_path(digest), _MAGIC, MAX_BYTES,
                             [digest, out, err, int(status)]):
            return
        old = self._read()
        listed = [digest] + [d for d in (old["outputs"] if old else []) if d != digest]
        if not write_checked(self.path, _MAGIC, MAX_BYTES, {
                "salt": self.salt, "files": seen["files"], "refs": seen["refs"],
                "refs_of": seen["refs_of"], "sniff": seen["sniff"], "walk": seen["walk"],
                "outputs": listed[:KEEP]}):
            return
        for gone in listed[KEEP:]:  # the reports no longer listed
            try:
                os.unlink(self._report_path(gone))
            except OSError:
                pass


def _prefixes(folders) -> list[tuple[str, str]]:
    """Each walked folder's prefixes: of an entry's path as ``scandir`` makes it (the folder,
    a separator unless it ends in one, the name) and of its path relative to the root (a
    printable folder's: with an ASCII name, printable as it is)."""
    return [(path if path.endswith(os.sep) else path + os.sep, "" if rel == "." else rel + "/")
            for path, rel, _ in folders]
