"""How the command line's process starts its work and ends (issue 16): the check runs from a
frame with room below it (:mod:`eigengate.scan.stack_room`), the process ends without taking
itself apart once everything is written (``cli._leave``), and a forked pool's workers start
with numpy and the analysis modules this process imported for them."""

import os
import subprocess
import sys
import textwrap
from pathlib import Path

import pytest

from eigengate.scan import pool as pool_mod
from eigengate.scan.stack_room import _SLOTS, _call, roomy_call

PLUGIN = str(Path(__file__).resolve().parents[1] / "plugin")


def python(code: str, env=None) -> subprocess.CompletedProcess:
    env = dict(os.environ if env is None else env)
    env["PYTHONPATH"] = PLUGIN + os.pathsep + env.get("PYTHONPATH", "")
    return subprocess.run([sys.executable, "-c", textwrap.dedent(code)], capture_output=True,
                          text=True, env=env, timeout=120)


def test_roomy_call_is_the_call():
    assert roomy_call(divmod, 17, 5) == (3, 2)
    assert roomy_call(dict, a=1, b=2) == {"a": 1, "b": 2}
    with pytest.raises(ZeroDivisionError):
        roomy_call(divmod, 1, 0)


def test_deep_calls_below_it_work():
    def depth(n):
        return 0 if n == 0 else 1 + depth(n - 1)

    assert roomy_call(depth, 600) == 600


@pytest.mark.skipif(sys.implementation.name != "cpython", reason="CPython's frame layout")
def test_its_frame_asks_for_the_room():
    assert _call.__code__.co_stacksize == _SLOTS


def test_the_process_ends_with_its_status_and_all_it_wrote():
    out = python("""
        import atexit, sys
        from eigengate.cli import _leave
        atexit.register(lambda: print("exit handler ran"))
        print("written", end="; ")
        print("to stderr", file=sys.stderr, end="")
        _leave(3)
        print("never")
    """)
    assert out.returncode == 3
    assert out.stdout == "written; exit handler ran\n"
    assert out.stderr == "to stderr"


def test_a_running_thread_gets_the_ordinary_exit():
    # the ordinary exit waits for a non-daemon thread; os._exit would cut it off
    out = python("""
        import threading, time
        from eigengate.cli import _leave
        def late():
            time.sleep(0.3)
            print("thread finished", flush=True)
        threading.Thread(target=late).start()
        _leave(1)
    """)
    assert out.returncode == 1
    assert out.stdout == "thread finished\n"


def test_a_check_through_the_console_entry_writes_everything(tmp_path):
    from support import oscillator, write

    (tmp_path / ".git").mkdir()
    write(tmp_path / "pyproject.toml", "[tool.eigengate.requirements]\nstable = true\n")
    write(tmp_path / "models" / "a.yaml", oscillator("a", min_damping=None))  # passes
    report = tmp_path / "out.json"
    out = python(f"""
        import sys
        sys.argv = ["eigengate", "check", "--output", "json:" + {str(report)!r},
                    {str(tmp_path)!r}]
        from eigengate.cli import run
        run()
    """)
    assert out.returncode == 0, out.stderr
    assert "1 file, 1 model checked" in out.stdout  # the text report's last lines came out
    import json

    assert json.loads(report.read_text(encoding="utf-8"))["files"]
    assert (tmp_path / ".eigengate-cache").is_dir()  # the cache was saved before the end


@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="the fork start method")
def test_a_fork_pool_preloads_the_analysis_with_one_blas_thread():
    env = {k: v for k, v in os.environ.items() if k not in pool_mod._ONE_THREAD}
    out = python("""
        import os, sys
        from eigengate.scan import pool
        ctx = pool._context()
        print(ctx.get_start_method(), os.environ["OPENBLAS_NUM_THREADS"],
              all(name in sys.modules for name in pool._FORK_PRELOAD), pool._threads())
    """, env=env)
    assert out.returncode == 0, out.stderr
    assert out.stdout.split() == ["fork", "1", "True", "1"]


@pytest.mark.skipif(not sys.platform.startswith("linux"), reason="the fork start method")
def test_blas_threads_the_user_asked_for_are_not_forked():
    env = {**os.environ, "OPENBLAS_NUM_THREADS": "2", "OMP_NUM_THREADS": "2"}
    out = python("""
        import os
        from eigengate.scan import pool
        method = pool._context().get_start_method()
        print(method, os.environ["OPENBLAS_NUM_THREADS"], pool._threads())
    """, env=env)
    assert out.returncode == 0, out.stderr
    method, count, threads = out.stdout.split()
    assert count == "2"  # the user's own setting stands
    # BLAS threads running: never forked (one core: OpenBLAS may start no second thread)
    assert method == ("forkserver" if int(threads) > 1 else "fork")
    if len(os.sched_getaffinity(0)) > 1:
        assert method == "forkserver"


def test_parsing_leaves_argparse_translating_as_before():
    import argparse

    from eigengate.cli.arguments import _parser, _untranslated

    before = argparse._, argparse.ngettext
    with _untranslated():
        args = _parser().parse_args(["check", "-q", "-j", "2", "models"])
    assert (args.command, args.quiet, args.jobs, args.paths) == ("check", True, 2, ["models"])
    assert (argparse._, argparse.ngettext) == before
    with pytest.raises(SystemExit), _untranslated():
        _parser().parse_args(["check", "--jobs", "x"])
    assert (argparse._, argparse.ngettext) == before


def test_usage_errors_read_as_argparse_writes_them(capsys):
    from eigengate.cli import main

    assert main(["check", "--jobs", "x"]) == 2
    assert "argument --jobs/-j: invalid int value: 'x'" in capsys.readouterr().err
    assert main(["check", "--format", "nope"]) == 2
    assert "invalid choice: 'nope' (choose from" in capsys.readouterr().err

