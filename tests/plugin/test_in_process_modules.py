"""The suite's in-process pytester runs keep the eigengate modules first imported inside them
(tests/conftest.py): a module imported before a run may keep classes of one the run imported
(the result cache's requirement classes), and a second copy of that module, imported by a
later test, would make its classes compare unequal to the kept ones."""

import importlib
import sys
import types

PROBE = "eigengate._in_process_run_probe"

INNER = f"""
import sys, types

def test_imports_inside_the_run():
    sys.modules[{PROBE!r}] = types.ModuleType({PROBE!r})  # a module first imported here
    from eigengate.scan.records import requirement_classes
    requirement_classes()  # imports rules.robust_range if nothing did before
"""


def test_a_module_first_imported_in_a_run_stays_after_it(pytester):
    pytester.makepyfile(test_inner=INNER)
    try:
        pytester.inline_run("-p", "no:cacheprovider").assertoutcome(passed=1)
        assert isinstance(sys.modules.get(PROBE), types.ModuleType)
    finally:
        sys.modules.pop(PROBE, None)


def test_the_cached_requirement_classes_are_those_of_the_imported_modules(pytester,
                                                                         monkeypatch):
    # the order that made a cache round trip test fail on one xdist worker: the result
    # cache's records module imported first, rules.robust_range first imported in a run
    records = importlib.import_module("eigengate.scan.records")  # as the run will find it
    records.requirement_classes.cache_clear()
    monkeypatch.delitem(sys.modules, "eigengate.rules.robust_range", raising=False)
    pytester.makepyfile(test_inner=INNER)
    try:
        pytester.inline_run("-p", "no:cacheprovider").assertoutcome(passed=1)
        from eigengate.rules.robust_range import RobustOverRange

        assert records.requirement_classes()["RobustOverRange"] is RobustOverRange
    finally:
        sys.modules.pop(PROBE, None)
        records.requirement_classes.cache_clear()  # the next call takes the modules then
