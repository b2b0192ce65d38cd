"""Every case of the hostile corpus through the loader, in-process: the expected outcome, an
error that names the file and the field, or a correct model; never another exception, never a
hang (each case runs under a time limit)."""

import pytest

from hostile_files import CASES, NAMED_HOLES
from hostile_harness import assert_outcome, make_repo

ACTIVE = CASES


def test_the_corpus_is_large_and_varied():
    assert len(CASES) >= 150
    suffixes = {c.path.rsplit(".", 1)[-1] for c in CASES}
    assert {"yaml", "toml", "json"} <= suffixes
    refs = {name.rsplit(".", 1)[-1] for c in CASES for name in c.files}
    assert {"npz", "mat", "csv"} <= refs
    assert sum(c.expect == "model" for c in CASES) >= 20  # valid inputs that look wrong


@pytest.fixture(scope="module")
def repo(tmp_path_factory):
    return make_repo(tmp_path_factory.mktemp("hostile") / "repo", ACTIVE)


@pytest.mark.parametrize("case", CASES, ids=[c.id for c in CASES])
def test_case(case, repo, tmp_path):
    if case.id in NAMED_HOLES:  # each hole the gate-integrity review named, on its own
        repo = make_repo(tmp_path / "repo", [case])
    assert_outcome(case, repo)
