"""Vector-field functions are imported only from modules whose file lies inside the
repository, even with ``allow_python = true``: ``os:system`` or any installed module is
refused before anything is imported or run."""

import sys

import pytest

from eigengate.errors import ModelError
from eigengate.load.loader import load_models
from support import write

FIELD = '''\
model_format: 1
vector_field:
  function: "{ref}"
  states: [x]
  at: [{{label: rest, x: [0.0]}}]
requirements:
  stable: true
'''


@pytest.fixture
def repo(tmp_path):
    write(tmp_path / "pyproject.toml", "[tool.eigengate]\nallow_python = true\n")
    write(tmp_path / "dyn" / "__init__.py", "")
    write(tmp_path / "dyn" / "decay.py", "def f(x, u):\n    return [-x[0]]\n")
    return tmp_path


def _load(repo, ref):
    path = write(repo / "models" / "m.yaml", FIELD.format(ref=ref))
    return load_models(path, repo, allow_python=True)


@pytest.mark.parametrize("ref", ["os:system", "subprocess:run", "json:loads",
                                 "sys:exit", "posixpath:join", "yaml:safe_load",
                                 "email.mime.text:MIMEText"])
def test_modules_outside_the_repository_are_refused(repo, ref):
    before = set(sys.modules)
    with pytest.raises(ModelError) as info:
        _load(repo, ref)
    message = str(info.value)
    assert message.startswith("models/m.yaml") and "vector_field.function" in message
    assert "inside the repository" in message, message
    if ref.startswith("email"):
        assert "email.mime.text" not in set(sys.modules) - before  # nothing was imported


def test_module_in_the_repository_is_imported(repo):
    (model,) = _load(repo, "dyn.decay:f")
    assert model.A.tolist() == [[-1.0]]  # d(-x)/dx = -1


def test_link_to_a_module_outside_is_refused(repo, tmp_path_factory):
    outside = tmp_path_factory.mktemp("outside") / "evil.py"
    outside.write_text("raise SystemExit('ran code from outside')\n")
    (repo / "dyn" / "evil.py").symlink_to(outside)
    with pytest.raises(ModelError) as info:
        _load(repo, "dyn.evil:f")
    assert "inside the repository" in str(info.value)


def test_package_shadowing_the_standard_library_is_refused(repo):
    # json/ in the repository would be found first on the path, yet `json` is already
    # imported from the standard library: the name is refused instead of guessed at.
    write(repo / "json" / "__init__.py", "def f(x, u):\n    return [-x[0]]\n")
    with pytest.raises(ModelError) as info:
        _load(repo, "json:f")
    assert "standard library" in str(info.value)
