"""Running one hostile case through the loader in-process, with a time limit."""

from __future__ import annotations

import contextlib
import signal
from pathlib import Path

from eigengate.errors import EigengateError, ModelError
from eigengate.model.formats import printable_name
from eigengate.load.loader import load_models

#: Seconds one case may take in-process before it counts as a hang.
CASE_SECONDS = 60


class Hang(Exception):
    pass


@contextlib.contextmanager
def time_limit(seconds: int):
    def stop(signum, frame):
        raise Hang(f"no answer within {seconds} s")

    old = signal.signal(signal.SIGALRM, stop)
    signal.setitimer(signal.ITIMER_REAL, seconds)
    try:
        yield
    finally:
        signal.setitimer(signal.ITIMER_REAL, 0)
        signal.signal(signal.SIGALRM, old)


def make_repo(root: Path, cases) -> Path:
    """A repository holding ``cases`` (plus nothing else): a pyproject.toml allowing Python."""
    root.mkdir(parents=True, exist_ok=True)
    (root / "pyproject.toml").write_text(
        "[project]\nname = 'hostile'\n\n[tool.eigengate]\nallow_python = true\n"
        "include = ['models/**']\n", encoding="utf-8")
    for case in cases:
        case.write(root)
    return root


def outcome(case, repo: Path):
    """Load ``case`` from ``repo``: ("model", models) or ("error", ModelError)."""
    from eigengate.scan.engine import analyse_model

    file = repo / case.path
    with time_limit(CASE_SECONDS):
        try:
            models = load_models(file, repo, allow_python=True)
        except EigengateError as exc:
            return "error", exc
        try:  # a loaded model must also analyse, or be refused there with a clear error
            for m in models:
                analyse_model(m)
        except EigengateError as exc:
            return "error", exc
        return "model", models


def assert_outcome(case, repo: Path) -> None:
    """The promise of the corpus: the expected outcome, an error that names the file and
    field, in one line, without a chained exception; a correct model otherwise."""
    kind, value = outcome(case, repo)
    if case.expect == "model":
        assert kind == "model", f"{case.id}: refused: {value}"
        assert value, case.id
        if case.check is not None:
            case.check(value)
        return
    assert kind == "error", f"{case.id}: accepted silently, gave {len(value)} model(s)"
    assert isinstance(value, ModelError), f"{case.id}: {type(value).__name__}: {value}"
    message = str(value)
    name = printable_name(Path(case.path).name)  # a name that is not UTF-8 is shown escaped
    assert name in message.split(":")[0] or message.startswith(case.path), (case.id, message)
    for part in case.fields:
        assert part in message, f"{case.id}: {part!r} not in {message!r}"
    for leak in ("Traceback", 'File "', "\n"):
        assert leak not in message, (case.id, message)
    assert value.__cause__ is None, case.id
    assert value.__context__ is None or value.__suppress_context__, case.id
