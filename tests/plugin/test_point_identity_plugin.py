"""The plugin's model items compare a relabelled operating point with its baseline entry, by
the same identity rule as the command line (docs/baselines.md), and do not call it stale."""

from support import cruise_points


def cruise(*rows):
    """zeta = k2 / 4 at each point (see support.cruise_points)."""
    return cruise_points(*(("", label, k2) for label, k2 in rows))


def test_relabelled_point_is_compared_not_new(project):
    project.pyproject('include = ["models/**/*.yaml"]\n')
    project.write("models/cruise.yaml", cruise(("v=30", 2.0), ("v=45", 2.0)))   # zeta 0.5
    project.pytester.runpytest("--eigengate-accept").assert_outcomes(passed=2)
    project.write("models/cruise.yaml", cruise(("v=30", 2.0), ("v=50", 0.4)))   # zeta 0.1
    result = project.pytester.runpytest()
    result.assert_outcomes(passed=1, failed=1)
    result.stdout.fnmatch_lines([
        "*EG203*(compared with baseline entry 'cruise[[]v=45[]]': the same operating point*",
        "baseline .eigengate/baseline.json: 2 models compared: 1 regressed, 0 new (no baseline "
        "entry), 0 stale entries, 0 improvements"])
