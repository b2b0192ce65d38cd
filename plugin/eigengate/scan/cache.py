"""Content-addressed cache of check results, so re-checking an unchanged repository is fast.

An entry's key hashes the tool version, the cache format, the effective configuration, the
model file's repository path and bytes. The entry records the hash of every matrix file the
model referenced; a changed reference is a miss.

So that an unchanged repository is not read and hashed again on every check, the pack also
records the status (size, modification and change times, inode) of each model and matrix
file with its key or hash, as a version-control index does: a file whose status is the same
is taken to have the same bytes. A status is recorded only when the file had not changed for
two seconds before the check began, so a change within one timestamp tick cannot go unseen.

Entries live in one pack file per configuration, read once and written once per run,
atomically. A pack is a short header, a JSON *head* (the entries' data: what reports read),
an index of the entries' blobs, and a *body* of raw bytes holding the blobs (float64
matrices, participation factors and mode tables, JSON texts of line tables), read only when
something uses them. Never pickles, never code. The header holds the sizes and a CRC-32 of
all three: a pack that fails it or whose index does not fit its body, or an entry that
cannot be parsed or checked, is ignored and rebuilt, never trusted. The folder explains
itself (README, .gitignore, CACHEDIR.TAG).
"""

from __future__ import annotations

import hashlib
import os
import time
from pathlib import Path
from typing import Any, Callable

from .pack import (  # noqa: F401 (re-exported: the pack format)
    Pack, PackBlobs, RawBlobs, Segment, pack_chunks, read_pack, write_pack)
from .checked_json import make_new, replace_atomically
from .status_records import is_record, record_value, signature
from .summary import summary_of

__all__ = ["ResultCache", "Pack", "PackBlobs", "RawBlobs", "CACHE_DIR", "read_pack", "write_pack"]

from .cache_format import CACHE_DIR  # noqa: E402 (re-exported)
_README = """\
This folder is eigengate's result cache. It is safe to delete at any time; eigengate
rebuilds it. Each entry is keyed by the hash of a model file's bytes, the files it references,
the effective configuration and the eigengate version. Use --no-cache to bypass it.
"""
_TAG = ("Signature: 8a477f597d28d172789f06886806bc55\n"
        "# This file is a cache directory tag created by eigengate.\n"
        "# For information about cache directory tags see https://bford.info/cachedir/\n")


def _sha(data: bytes) -> str:
    return hashlib.sha256(data).hexdigest()


#: A file changed this soon before a check began could change again within the same
#: timestamp tick without its status showing it: its status is not recorded.
_RACY_NS = 2_000_000_000


class ResultCache:
    """The cache of one configuration: one pack of entries below ``root / CACHE_DIR``.

    ``get`` serves entries from the pack read at the first lookup; ``put`` collects new ones;
    ``save`` writes the pack once, atomically, keeping the entries used or made in this run
    and, up to a limit, older ones (so scans of parts of a repository do not evict each
    other). One pack per configuration digest, so two configurations never mix.
    """

    MAX_ENTRIES = 100_000

    def __init__(self, root: Path, config_digest: str, *, folder: Path | None = None) -> None:
        from ..version import __version__
        from .cache_format import FORMAT

        self.root = Path(root)
        self.folder = Path(folder) if folder is not None else self.root / CACHE_DIR
        self._salt = f"eigengate {__version__}\0cache {FORMAT}\0config {config_digest}\0"
        self._salt_bytes = self._salt.encode()
        self._pack = self.folder / f"v{FORMAT}" / f"{_sha(self._salt_bytes)[:24]}.pack"
        self._old: dict[str, Any] | None = None
        self._read: Pack | None = None
        self._tables: dict[str, dict] = {"files": {}, "refs": {}, "sniff": {}}
        self._new: dict[str, tuple[dict, Segment]] = {}
        self._used: dict[str, None] = {}  # ordered: the pack keeps the scan's order
        self._started = time.time_ns()
        self._at_exit = False
        #: Status records to add: "files" (model file → key), "refs" (matrix file → hash),
        #: "sniff" (file → whether its content has a model_format key).
        self._noted: dict[str, dict[str, list]] = {"files": {}, "refs": {}, "sniff": {}}

    def key(self, source: str, content: bytes) -> str:
        return _sha(self._salt_bytes + source.encode() + b"\0" + content)

    def _ref_hashes(self, refs) -> dict[str, str] | None:
        out = {}
        for rel in refs:
            try:
                path = self.root / rel
                st = os.stat(path)
                digest = self._recorded("refs", rel, st)
                if digest is None:
                    digest = _sha(path.read_bytes())
                    self._note("refs", rel, st, digest)
                out[rel] = digest
            except OSError:
                return None
        return out

    def _recorded(self, table: str, rel: str, st: os.stat_result) -> str | None:
        if self._old is None:
            self._entries()
        return record_value(self._noted[table].get(rel) or self._tables[table].get(rel), st)

    def _note(self, table: str, rel: str, st: os.stat_result | None, value: str) -> None:
        if st is not None and max(st.st_mtime_ns, st.st_ctime_ns) < self._started - _RACY_NS:
            row = signature(st) + [value]
            self._entries()
            if self._tables[table].get(rel) != row:  # only what is new makes a save
                self._noted[table][rel] = row

    def status_row(self, table: str, rel: str) -> list | None:
        """The status record ``[size, mtime, ctime, inode, value]`` of ``rel`` in ``table``
        ("files", "refs", "sniff") as the next save writes it, or None."""
        self._entries()
        row = self._noted[table].get(rel) or self._tables[table].get(rel)
        return row if is_record(row) else None

    def status_table(self, table: str) -> dict[str, list]:
        """Every status record of ``table`` as the next save writes it."""
        self._entries()
        return {rel: row for rel, row in {**self._tables[table], **self._noted[table]}.items()
                if is_record(row)}

    def entry_refs(self, key: str) -> dict[str, str] | None:
        """The referenced files of entry ``key`` with their hashes (made or used in this
        run), or None when the next save does not hold it."""
        new = self._new.get(key)
        if new is not None:
            return dict(new[0]["refs"])
        entry = self._entries().get(key) if key in self._used else None
        refs = entry.get("refs") if isinstance(entry, dict) else None
        return dict(refs) if isinstance(refs, dict) else None

    def known_key(self, rel: str, st: os.stat_result) -> str | None:
        """The key of model file ``rel`` when its status is the one recorded with it."""
        return self._recorded("files", rel, st)

    def file_key(self, rel: str, st: os.stat_result | None, path: str,
                 content: bytes | None = None) -> str | None:
        """The key of model file ``rel`` (at ``path``, status ``st`` taken before reading):
        the recorded one when its status is unchanged, else from its bytes (``content`` when
        already read), recording the status; None when it cannot be read."""
        return self.file_key_read(rel, st, path, content)[0]

    def file_key_read(self, rel: str, st: os.stat_result | None, path: str,
                      content: bytes | None = None) -> tuple[str | None, bytes | None]:
        """:meth:`file_key`, and the bytes it read for it (None when it read none: the key
        was recorded, ``content`` was given, or the file cannot be read), so that the file is
        analysed from the very bytes its key names."""
        key = None if st is None else self.known_key(rel, st)
        read = None
        if key is None:
            if content is None:
                from ..errors import ModelError
                from ..model.formats import MAX_MODEL_FILE_BYTES, read_regular

                try:  # as the loader reads it: never a FIFO or device, never past its limit
                    content = read = read_regular(path, rel, MAX_MODEL_FILE_BYTES)
                except ModelError:
                    return None, None  # no key: the loader says what is wrong with the file
            key = self.key(rel, content)
            self.note_key(rel, st, key)
        return key, read

    def note_key(self, rel: str, st: os.stat_result | None, key: str) -> None:
        """Record the status of model file ``rel`` (taken before it was read) with its key."""
        self._note("files", rel, st, key)

    def references(self, rel: str, content: bytes) -> tuple[str, ...] | None:
        """The files (matrix files, vector-field modules) that model file ``rel`` with these
        bytes referenced when it was last analysed, or None when the pack has no entry for it
        (for a hook mapping changed files to the models that depend on them)."""
        entry = self._entries().get(self.key(rel, content))
        refs = entry.get("refs") if isinstance(entry, dict) else None
        return tuple(refs) if isinstance(refs, dict) else None
    def sniffed(self, rel: str, st: os.stat_result) -> bool | None:
        """Whether file ``rel`` had a model_format key when last read with this status."""
        said = self._recorded("sniff", rel, st)
        return None if said is None else said == "model"

    def note_sniff(self, rel: str, st: os.stat_result | None, is_model: bool) -> None:
        self._note("sniff", rel, st, "model" if is_model else "plain")

    def _entries(self) -> dict[str, Any]:
        if self._old is None:
            try:
                pack = read_pack(self._pack.read_bytes())
                head = pack.head
                entries = head.get("entries") if head.get("salt") == self._salt else None
                if isinstance(entries, dict):
                    self._old, self._read = entries, pack
                    for table in self._tables:
                        rows = head.get(table)
                        self._tables[table] = rows if isinstance(rows, dict) else {}
                else:
                    self._old = {}
            except (OSError, ValueError):
                self._old = {}  # missing or corrupt: start again, never trust it
        return self._old

    def get(self, key: str) -> tuple[dict[str, Any], PackBlobs, None] | None:
        """The stored summary and blobs for ``key`` (:mod:`eigengate.scan.summary`; the last
        blob, a JSON text, is the rest of the data), and None in place of the whole data,
        or None (missing, corrupt, or a reference changed)."""
        entry = self._entries().get(key)
        try:
            # a missing entry (None) raises TypeError here, handled like a malformed one
            refs, summary, (first, count) = entry["refs"], entry["summary"], entry["blobs"]  # type: ignore[index]
            if type(refs) is not dict or type(summary) is not dict or type(count) is not int \
                    or count < 1:
                return None
            pack = self._read
            blobs = pack.blobs(first, count)  # type: ignore[union-attr]
            if pack.row(first + count - 1)[3] >= 0:  # type: ignore[union-attr]
                return None  # the last blob is not a text
            if refs and self._ref_hashes(sorted(refs)) != refs:
                return None
        except (KeyError, TypeError, ValueError, AttributeError):
            return None
        self._used[key] = None
        return summary, blobs, None

    def put(self, key: str, data: dict[str, Any], blobs: Segment, refs: list[str]) -> None:
        """Remember ``data`` (the summary) and its blobs, a segment and its index
        (:func:`eigengate.scan.encode.results_to_data`), for ``key``; written, as they
        are, by :meth:`save`."""
        hashes = self._ref_hashes(refs)
        if hashes is not None:
            self._new[key] = ({"refs": hashes, "summary": data}, blobs)

    def _old_blobs(self, entry: dict) -> Segment | None:
        try:
            return self._read.items(*entry["blobs"])  # type: ignore[union-attr]
        except (KeyError, TypeError, ValueError, AttributeError):
            return None

    def save(self) -> None:
        """Write the pack atomically if anything new was made; failures are ignored (the
        cache is optional, and a half-written pack is never visible)."""
        if not self._new and not any(self._noted.values()):
            return
        old = self._entries()
        order = [k for k in self._used if k in old]
        order += [k for k in old if k not in self._used and k not in self._new]
        order = order[:max(0, self.MAX_ENTRIES - len(self._new))]
        entries: dict[str, Any] = {}
        blobs: dict[str, Segment] = {}
        for k in order:
            kept = self._old_blobs(old[k])
            if kept is not None:
                entries[k] = {"refs": old[k].get("refs"), "summary": old[k].get("summary")}
                blobs[k] = kept
        for k, (entry, items) in self._new.items():
            entries[k] = entry  # its blobs' span is set by write_pack
            blobs[k] = items
        head: dict[str, Any] = {"salt": self._salt, "entries": entries}
        refs = {h for e in entries.values() for h in (e.get("refs") or {}).values()}
        for table, wanted in (("files", entries), ("refs", refs)):
            rows = {**self._tables[table], **self._noted[table]}
            head[table] = {rel: row for rel, row in rows.items()
                           if is_record(row) and row[4] in wanted}
        sniff = {**self._tables["sniff"], **self._noted["sniff"]}
        head["sniff"] = dict(list(sniff.items())[-self.MAX_ENTRIES:])
        pieces = pack_chunks(head, blobs)
        try:
            self._ensure_folder()
            self._pack.parent.mkdir(parents=True, exist_ok=True)
            replace_atomically(self._pack, pieces)
        except OSError:
            return
        self._old, self._new = None, {}
        self._noted = {"files": {}, "refs": {}, "sniff": {}}

    def save_at_exit(self) -> None:
        """:meth:`save` when this process ends (once however often asked)."""
        if not self._at_exit:
            import atexit

            self._at_exit = True
            atexit.register(self.save)

    def _ensure_folder(self) -> None:
        if (self.folder / "CACHEDIR.TAG").is_file():
            return
        if self.folder.is_dir():  # made by hand, or its tag was deleted: restore the files
            self._explain(self.folder)
            return
        self.folder.parent.mkdir(parents=True, exist_ok=True)
        # Build the explanatory files in a temporary folder, then move it into place, so a
        # half-made cache folder is never seen; a concurrent creator simply wins.
        # (as tempfile.mkdtemp makes one: owner-only, a name no other process picks)
        tmp = Path(make_new(os.fspath(self.folder.parent), ".eigengate-cache-",
                            lambda name: os.mkdir(name, 0o700))[1])
        try:
            self._explain(tmp)
            try:
                os.rename(tmp, self.folder)
            except OSError:
                pass
        finally:
            if tmp.exists():
                for f in tmp.iterdir():
                    f.unlink()
                tmp.rmdir()

    @staticmethod
    def _explain(folder: Path) -> None:
        (folder / "README").write_text(_README, encoding="utf-8")
        (folder / ".gitignore").write_text("# created by eigengate\n*\n", encoding="utf-8")
        (folder / "CACHEDIR.TAG").write_text(_TAG, encoding="utf-8")
