"""Without dask installed, ``--cluster`` is a clear error naming the extra to install; the
plain install never imports dask (tests/test_import_cost.py)."""

from __future__ import annotations

import sys

from support import oscillator, write


def test_without_dask_the_error_names_the_extra(monkeypatch, capsys, tmp_path):
    from eigengate.cli import main

    work = tmp_path
    (work / ".git").mkdir()
    write(work / "m.yaml", oscillator())
    monkeypatch.setitem(sys.modules, "distributed", None)  # import distributed: ImportError
    code = main(["check", str(work), "--no-cache", "--cluster", "tcp://127.0.0.1:8786"])
    err = capsys.readouterr().err
    assert code == 2
    assert err.strip() == ('eigengate: error: --cluster needs dask and distributed, which are '
                           'not installed: pip install "eigengate[cluster]"')

