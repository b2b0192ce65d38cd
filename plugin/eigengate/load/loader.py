"""Load model files (format 1) into validated :class:`~eigengate.model.core.Model` objects.

One file gives one model, or one per operating point. The file format is documented in
``docs/model-format.md`` and described by ``schema/model-v1.schema.json``; the key sets
below are the single list both are checked against.
"""

from __future__ import annotations

import dataclasses
import functools
import os
import stat
from pathlib import Path
from collections.abc import Mapping
from typing import Any, Callable

from ..model.filenames import name_parts, plain_name
from ..model.formats import printable_name, read_document, suggest
from ..errors import ModelError
from ..model.core import Model, sample_period_problem

__all__ = ["FORMAT_VERSIONS", "TOP_KEYS", "load_models", "load_models_with_refs",
           "load_models_from_bytes", "load_document", "find_root", "inputs_by_title"]

from .context import check_waiver_labels, label_shape, point_identity
from .context import (  # noqa: F401 (re-exported: the loader's schema and helpers)
    FORMAT_VERSIONS, TOP_KEYS, POINT_KEYS, SS_KEYS, TF_KEYS, FEEDBACK_KEYS,
    FEEDBACK_KINDS, CONTROLLER_SS_KEYS, CONTROLLER_TF_KEYS, DOMAINS, _Ctx,
    _check_keys, _mapping, _kind, _requirements)


def find_root(path: Path) -> Path:
    """Nearest folder at or above ``path``'s folder holding ``.git`` or ``pyproject.toml``;
    the file's own folder when there is none."""
    # The folder the path is in, links above it followed; a linked file itself is not
    # followed, so a link's repository is the one it lies in, not the one it points into.
    start = Path(os.path.realpath(os.path.dirname(os.path.abspath(path))))
    for folder in (start, *start.parents):
        if (folder / ".git").exists() or (folder / "pyproject.toml").is_file():
            return folder
    return start


def load_models(path: str | os.PathLike[str], root: str | os.PathLike[str] | None = None,
                *, allow_python: bool = False) -> list[Model]:
    """Load the model file at ``path``: one :class:`Model` per operating point, or one.

    Parameters
    ----------
    path
        A ``.yaml``/``.yml``/``.toml``/``.json`` model file.
    root
        Repository root; found from ``path`` with :func:`find_root` when None. Model sources
        are reported relative to it and referenced matrix files must lie inside it.
    allow_python
        Whether a ``vector_field`` block may import project code (``module:function``,
        resolved relative to ``root``); refused with a :class:`ModelError` otherwise.

    Raises
    ------
    ModelError
        For any problem with the file, naming the file, field and line.
    """
    return load_models_with_refs(path, root, allow_python=allow_python)[0]


def load_models_with_refs(path: str | os.PathLike[str],
                          root: str | os.PathLike[str] | None = None, *,
                          allow_python: bool = False, content: bytes | None = None
                          ) -> tuple[list[Model], list[str]]:
    """Like :func:`load_models`, also returning the repository-relative paths (POSIX) of the
    matrix files the model references, sorted and without repeats, so a cache can hash them.
    ``content``: the file's bytes, read already (as ``model.formats.read_regular`` reads
    them: a regular file within the size limit); the file is then not read again."""
    name = path if type(path) is str else os.fspath(path)
    # a plain absolute name is what Path(name) makes of it: read as it is, with no Path
    file: str | Path = name if type(name) is str and plain_name(name) else Path(path)
    name = os.fspath(file)
    base = _path(os.fspath(root)) if root is not None else find_root(Path(file))
    source = model_source(file, base)
    data, lines = read_document(file, source, content)
    refs: list[str] = []
    # the folder's Path from the (normalised) name of the file: equal to file.parent
    models = _load(data, source=source, root=base, base_dir=_path(os.path.dirname(name)),
                   lines=lines, refs=refs, allow_python=allow_python,
                   stem=file.stem if isinstance(file, Path) else name_parts(name)[0])
    return models, sorted(set(refs))


@functools.lru_cache(maxsize=256)
def _path(name: str) -> Path:
    """``Path(name)``, once per process for a root or model folder (a Path does not change)."""
    return Path(name)


@functools.lru_cache(maxsize=256)
def real_folder(folder: str) -> str:
    """``os.path.realpath`` of a folder, once per process: the repository root and model
    folders are resolved once per run, not once per file."""
    return os.path.realpath(folder)


def _real_path(file: str | Path) -> str:
    """``os.path.realpath(file)``; for a plain name (:func:`eigengate.model.filenames.
    plain_name`) that is not a link, its real folder (once per process, :func:`real_folder`)
    and its name: the folder's parts are not looked at again for every file in it."""
    if type(file) is str and plain_name(file):
        try:
            mode = os.lstat(file).st_mode
        except OSError:
            mode = None
        if mode is not None and not stat.S_ISLNK(mode):
            folder, _, last = file.rpartition("/")
            return os.path.join(real_folder(folder or "/"), last)
    return os.path.realpath(file)


def model_source(file: str | Path, root: Path) -> str:
    """The repository-relative name of model file ``file``, after checking that it may be read:
    a link in the repository that points outside it is refused (like a matrix file's link,
    before anything of the target is read), as is a name that is not valid UTF-8 (shown with
    escapes). A file outside ``root`` that is not such a link keeps the path it was given."""
    root_real = real_folder(os.fspath(root))
    real = _real_path(file)
    if real.startswith(root_real) and real[len(root_real):len(root_real) + 1] in ("", os.sep):
        # both paths are absolute and normalised: the relative path is the rest of ``real``
        rest = real[len(root_real) + 1:] or "."
        source = rest if os.sep == "/" else Path(rest).as_posix()
    else:
        file = Path(file)
        here = os.path.join(real_folder(os.path.dirname(os.path.abspath(file))), file.name)
        if here.startswith(root_real + os.sep):
            raise ModelError(printable_name(Path(os.path.relpath(here, root_real)).as_posix()),
                             "", "is a link that points outside the repository; it was not "
                             "read", hint="keep model files inside the repository")
        source = file.as_posix()
    shown = printable_name(source)
    if shown != source:
        raise ModelError(shown, "", "has a file name that is not valid UTF-8; it was not read",
                         hint="rename the file")
    return source


def load_models_from_bytes(raw: bytes, source: str, read: Callable[[str], bytes], *,
                           stem: str | None = None, python_root: Path | None = None
                           ) -> tuple[list[Model], list[str]]:
    """Load a model file given as bytes, reading its matrix files through ``read``.

    For model files that are not in the working tree (a git revision, say). ``source`` is the
    file's repository-relative POSIX path: its suffix picks the format, its folder is where
    references are resolved (lexically, confined to the repository) and ``read(rel)`` returns
    the bytes of the repository-relative file ``rel`` (``FileNotFoundError`` when missing).
    ``stem`` replaces the file-name stem as the default model name (a renamed file keeps the
    name its new path gives it). ``python_root``, when given, allows a ``vector_field`` block
    and is the folder its module is imported from (a revision's Python files, materialised by
    :mod:`eigengate.scan.gitrev`); without it such a block is refused. Returns the models and the
    referenced paths, as :func:`load_models_with_refs` does.
    """
    import posixpath
    from pathlib import PurePosixPath

    from ..model.formats import parse_bytes

    data, lines = parse_bytes(raw, posixpath.splitext(source)[1], source)
    refs: list[str] = []
    base_dir = PurePosixPath(posixpath.dirname(source) or ".")
    # base_dir: a PurePosixPath, only ever joined (the files come from read)
    models = _load(data, source=source, root=None, base_dir=base_dir,  # type: ignore[arg-type]
                   lines=lines, refs=refs, stem=stem or PurePosixPath(source).stem, read=read,
                   allow_python=python_root is not None, python_root=python_root)
    return models, sorted(set(refs))


def load_document(data: Mapping[str, Any], *, source: str = "<document>",
                  root: Path | None = None, base_dir: Path | None = None,
                  lines: Mapping[str, int] | None = None,
                  allow_python: bool = False) -> list[Model]:
    """Build models from an already parsed document (same rules as :func:`load_models`).

    Parameters
    ----------
    data
        The top-level mapping.
    source
        Name for messages and ``Model.source``; its stem is the default model name.
    root, base_dir
        Repository root and the folder file references are relative to; references are
        refused when ``base_dir`` is None.
    lines
        ``{dotted.field: line}`` as produced by the readers, when known.
    """
    if not isinstance(data, Mapping):
        raise ModelError(source, "", f"must be a mapping of fields, got {type(data).__name__}")
    return _load(dict(data), source=source, root=root, base_dir=base_dir,
                 lines=dict(lines or {}), refs=[], stem=Path(source).stem or "model",
                 allow_python=allow_python)


def _load(data: dict[str, Any], *, source: str, root: Path | None, base_dir: Path | None,
          lines: dict[str, int], refs: list[str], stem: str,
          read: Callable[[str], bytes] | None = None,
          allow_python: bool = False, python_root: Path | None = None) -> list[Model]:
    ctx = _Ctx(source, root, base_dir, lines, refs, read=read, allow_python=allow_python,
               python_root=python_root)
    if "model_format" not in data:
        raise ctx.err("model_format", "is missing",
                      f"start the file with 'model_format: {FORMAT_VERSIONS[-1]}'")
    version = data["model_format"]
    if isinstance(version, bool) or version not in FORMAT_VERSIONS:
        raise ctx.err("model_format", f"is {version!r}, but this version of eigengate reads "
                      f"model_format {', '.join(map(str, FORMAT_VERSIONS))} only",
                      "upgrade eigengate to read newer files")
    _check_keys(data, TOP_KEYS, ctx, "", "a model file")
    name = data.get("name", stem)
    if not isinstance(name, str) or not name.strip():
        raise ctx.err("name", f"must be a non-empty string, got {name!r}")
    if not isinstance(data.get("description", ""), str):
        raise ctx.err("description", f"must be text, got {_kind(data['description'])}")
    domain = data.get("domain", "continuous")
    if domain not in DOMAINS:
        close = suggest(str(domain), DOMAINS)
        raise ctx.err("domain", f"must be 'continuous' or 'discrete', got {domain!r}",
                      f"did you mean {close!r}?" if close else None)
    ctx.domain = domain
    ctx.sample_period = _sample_period(data, domain, ctx, "sample_period")
    if "vector_field" in data and "parameters" in data:
        raise ctx.err("parameters", "is not used with a vector_field (a nonlinear model has "
                      "its own parameters, under vector_field)",
                      "declare parameter ranges on a linear model (plant and feedback)")
    if "vector_field" in data:  # a nonlinear model: linearised by eigengate.analysis.nonlinear
        from .fields import load_vector_field

        return load_vector_field(data, ctx, name, _requirements)
    if "plant" not in data and "operating_points" not in data and "grid" not in data:
        raise ctx.err("plant", "is missing", "describe the plant with A (state space) or "
                      "num and den (transfer function)")
    points = data.get("operating_points")
    base = {k: v for k, v in data.items() if k != "operating_points"}
    if "waivers" in data:
        from ..rules.waivers import parse_waivers

        ctx.waivers = parse_waivers(data["waivers"], source, "waivers", lines)
    from .blocks import build_model

    if "grid" in data:  # an operating-point grid: a model per grid point
        from .grid import load_grid

        return load_grid(data, ctx, name, build_model, _merge)
    if points is None:
        return [build_model(base, ctx, name, None)]
    if not isinstance(points, list) or not points:
        raise ctx.err("operating_points", f"must be a non-empty list of mappings, got "
                      f"{_kind(points) if points != [] else 'an empty list'}")
    models: list[Model] = []
    seen: dict[str, int] = {}
    ids: dict[str, int] = {}
    for i, point in enumerate(points):
        where = f"operating_points.{i}"
        pctx = dataclasses.replace(ctx, prefix=f"operating_points[{i}].")
        pctx.lines = {**ctx.lines, **{k[len(where) + 1:]: v for k, v in ctx.lines.items()
                                      if k.startswith(where + ".")}}
        point = _mapping(point, ctx, f"operating_points[{i}]")
        label = point.get("label")
        if label is None:
            raise ModelError(source, f"operating_points[{i}].label", "is missing",
                             line=ctx.lines.get(where),
                             hint="each operating point needs a unique label, e.g. label: 'v=30'")
        if not isinstance(label, str) or not label.strip():
            raise pctx.err("label", f"must be a non-empty string, got {label!r}",
                           "quote it, e.g. label: '30'")
        if label in seen:
            raise pctx.err("label", f"is {label!r}, already used by operating_points"
                           f"[{seen[label]}]", "labels must be unique")
        seen[label] = i
        pctx.prefix = f"operating_points[{i}] (label {label!r})."
        _check_keys(point, POINT_KEYS, pctx, "", "an operating point")
        ident = point_identity(point, i, pctx, ids) or f"#{i}:{label_shape(label)}"
        merged = _merge(base, {k: v for k, v in point.items() if k not in ("label", "id")})
        models.append(build_model(merged, pctx, name, label).with_fields(point_id=ident))
    check_waiver_labels(ctx, list(seen))
    return models


def _merge(base: Any, over: Any) -> Any:
    # Mappings merge key by key; a null removes the key; anything else replaces, and a matrix
    # file reference ({file: ...}) replaces as a whole rather than mixing keys of two files.
    if not isinstance(base, Mapping) or not isinstance(over, Mapping) or "file" in over \
            or "file" in base:
        return over
    out = dict(base)
    for k, v in over.items():
        if v is None:
            out.pop(k, None)
        elif k in out:
            out[k] = _merge(out[k], v)
        else:
            out[k] = v
    return out


def _sample_period(block: Mapping[str, Any], domain: str, ctx: _Ctx, path: str) -> float | None:
    value = block.get("sample_period")
    if domain == "continuous":
        if value is not None:
            raise ctx.err(path, f"is {value!r}, but a continuous model has no sample period",
                          "set domain: discrete, or remove sample_period")
        return None
    if value is None:
        raise ctx.err(path, "is missing; a discrete model needs its sample period in seconds",
                      "add e.g. sample_period: 0.01")
    problem = sample_period_problem(value)
    if problem:
        raise ctx.err(path, problem)
    return float(value)


def inputs_by_title(path: str | os.PathLike[str], root: str | os.PathLike[str] | None = None,
                    *, allow_python: bool = False) -> dict[str, Any]:
    """The inputs (:class:`~eigengate.load.inputs.ModelInputs`) of every model of the file at
    ``path``, by title: the file read again, for a result from the cache or a worker."""
    return {m.title: m.file_inputs for m in load_models(path, root, allow_python=allow_python)
            if m.file_inputs is not None}
