"""Parametrise tests over the points of a model file: ``eigengate.points(path)``.

::

    import eigengate
    import pytest

    @pytest.mark.parametrize("model", eigengate.points("models/winch/tension.yaml"))
    def test_tension_loop(model, stability):
        stability.check(model, min_decay_rate=0.2)

gives one test per model of the file, with the point's identity as its id:
``test_tension_loop[speed=0.5,load=100]`` for a grid, the label for an operating point
(``test_x[empty, flat]``), the model's name for a file of one model. Each parameter is the
loaded :class:`~eigengate.model.core.Model` (its requirements from the file; a grid point's
coordinates in ``model.grid``). See docs/grids.md.
"""

from __future__ import annotations

import inspect
import os
from pathlib import Path
from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:  # pragma: no cover
    from ..model.core import Model

__all__ = ["points", "point_id"]


def point_id(model: "Model") -> str:
    """A test id for ``model``: its grid coordinates or label, else its name."""
    if getattr(model, "grid", None) is not None and model.point_id:
        return model.point_id
    return model.label if model.label is not None else model.name


def _resolve(path: str | os.PathLike[str], caller: str | None) -> Path:
    """``path`` as given when it exists (relative to the current folder), else relative to the
    folder of the test module that asked for it."""
    given = Path(path)
    if given.is_absolute() or given.exists() or caller is None:
        return given
    beside = Path(caller).parent / given
    return beside if beside.exists() else given


def points(path: str | os.PathLike[str], root: str | os.PathLike[str] | None = None, *,
           allow_python: bool = False) -> list[Any]:
    """One ``pytest.param(model, id=...)`` per model of the model file at ``path``, in the
    file's order (a grid: the last axis varies fastest).

    ``path`` is relative to the current folder, or, where no such file is there, to the
    folder of the calling module; ``root`` and ``allow_python`` are those of
    :func:`eigengate.load_models`. A file that cannot be loaded raises its
    :class:`~eigengate.errors.ModelError` (pytest shows it as the module's collection error).
    """
    import pytest

    from ..load.loader import load_models

    frame = inspect.currentframe()
    caller = frame.f_back.f_globals.get("__file__") if frame and frame.f_back else None
    models = load_models(_resolve(path, caller), root, allow_python=allow_python)
    return [pytest.param(m, id=point_id(m)) for m in models]
