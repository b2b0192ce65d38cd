"""Every requirement key × every input kind: evaluated (a verdict of its rule, and a value
that violates it fails) or refused with an error naming the key. Never a pass with the key
ignored.

The keys come from the parser (``REQUIREMENT_KEYS``) and the rule catalogue, so a new key
fails ``test_every_key_has_a_sample`` until it has a row here. Which cells are evaluated is
stated from the rule families of the catalogue (``rules.py``: margins EG30x need a feedback
loop, equilibria EG40x a vector field, EG113 declared parameters), not from the code under
test.

Subjects (outside sources beside each):

* the loop ``G(s) = K/(s(s+1)(s+2))``: closed with unity negative feedback it is stable for
  0 < K < 6 (Routh); K = 1 ("calm") has gain margin 6 (15.56 dB) at ω = √2 and phase margin
  ≈ 53.4° (classic textbook example, cross-checked with python-control's
  ``stability_margins``); K = 10 ("wild") gives s³ + 3s² + 2s + 10, two roots in the right
  half-plane by Routh (first column 1, 3, −4/3, 10), one in the left: a saddle;
* the closed loop itself, K/(s³ + 3s² + 2s + K), as the system given without a loop;
* a double well ``x' = v, v' = x − x³ − 0.2 v``: equilibria (0, 0), a saddle (λ² + 0.2λ − 1),
  and (±1, 0), stable foci (λ² + 0.2λ + 2: ζ = 0.2/(2√2) ≈ 0.071, ωn = √2) (linearisation,
  Strogatz, Nonlinear Dynamics and Chaos, ch. 6, from memory).
"""

from __future__ import annotations

import textwrap
import warnings
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import control
import numpy as np
import pytest
import yaml
from support import run_cli

from eigengate.rules.parsing import REQUIREMENT_KEYS
from eigengate.pytest.assertions import Checker, RequirementArgumentError, StabilityAssertionError
from eigengate.scan.config import parse_config
from eigengate.scan.engine import check_file
from eigengate.errors import ModelError
from eigengate.load.loader import load_models
from eigengate.model.core import from_arrays
from eigengate.rules.catalogue import RULES, rule_by_key


@dataclass(frozen=True)
class Sample:
    bad: Any            # violates the requirement on the subjects below
    good: Any = None    # met by the calm loop (None: no such value for these subjects)
    wild: bool = False  # the violation needs the unstable closed loop (K = 10)


# Figures of the calm closed loop s³ + 3s² + 2s + 1 (roots by numpy.roots: −2.3247 and
# −0.3376 ± 0.5623j, so slowest decay 0.338 1/s, ζ = 0.515, ωn 0.656 and 2.325 rad/s).
SAMPLES: dict[str, Sample] = {
    "stable": Sample(True, True, wild=True),
    "min_decay_rate": Sample(100.0, 0.1),
    "min_damping": Sample(0.99, 0.3),
    "max_frequency": Sample(0.01, 10.0),
    "pole_region": Sample({"min_decay_rate": 100.0}, {"min_damping": 0.3}),
    "equilibrium": Sample("saddle", "stable-focus"),
    "no_saddle": Sample(True, True, wild=True),
    "directions": Sample({"unstable": 1}, {"unstable": 0}),
    "min_gain_margin_db": Sample(100.0, 6.0),        # measured 15.56 dB
    "min_phase_margin_deg": Sample(89.0, 45.0),      # measured 53.4°
    "min_delay_margin": Sample(100.0, 0.5),          # PM/ωc ≈ 0.932 rad / 0.446 rad/s ≈ 2.1 s
    "max_sensitivity_peak": Sample(1.0, 10.0),       # |S| → 1 at high ω and exceeds 1 near ωc
    "min_disk_margin": Sample(1.99, 0.1),
    "no_saddle_in_box": Sample(True),                # the origin of the double well is one
    "equilibrium_at": Sample([{"x": [0.0, 0.0], "type": "stable-focus"}],
                             [{"x": [0.0, 0.0], "type": "saddle"}]),
    "equilibrium_count": Sample(2, 3),
    "equilibria_stable": Sample(True),
    # robustness (any stable model): the complex stability radius is at most the distance of
    # the spectrum to the axis (σ_min(A − iωI) ≤ |λ − iω|), here 0.338 < 100; the
    # ε-pseudospectral abscissa is at least the spectral abscissa −0.338 > −10 (both:
    # Trefethen & Embree, Spectra and Pseudospectra, 2005, ch. 2 and 49); the closed loop's
    # realisations are non-normal (a companion-like A: (A + Aᵀ)/2 has a positive
    # eigenvalue), so ‖e^{At}‖ exceeds 1 for small t and a growth limit of 1 fails.
    "min_stability_radius": Sample(100.0, 1e-9),
    "max_transient_growth": Sample(1.0, 1e6),
    "max_pseudospectral_abscissa": Sample({"epsilon": 0.01, "max": -10.0},
                                          {"epsilon": 1e-6, "max": 10.0}),
    # needs declared parameters, which no subject here has: refused in every cell
    "robust": Sample({"stable": True}, {"stable": True}),
}

#: The input kinds that provide a loop, a vector field, or neither.
PYTHON_KINDS = ("tf", "tf-open", "ss", "ss-open", "abcd", "abcd-open", "ndarray",
                "model-plain", "model-loop", "model-vf", "file-plain", "file-loop", "file-vf",
                "chain", "chain-open")
ENGINE_SUBJECTS = ("plain", "loop", "vf")


def family(key: str) -> str:
    rid = rule_by_key(key).id
    if rid == "EG113":  # robust-over-range: needs a parameters block
        return "parameters"
    return {"EG3": "loop", "EG4": "vf"}.get(rid[:3], "any")


def evaluable(key: str, provides: str) -> bool:
    need = family(key)
    return need == "any" or need == provides


def provides_of(kind: str) -> str:
    if kind.endswith("-open") or kind.endswith("-loop"):
        return "loop"
    return "vf" if kind.endswith("-vf") else "plain"


def test_every_key_has_a_sample():
    assert set(SAMPLES) == set(REQUIREMENT_KEYS), "give each requirement key a Sample row"
    # every requirement rule of the catalogue is a parser key (known_modes has its own block)
    requirement_rules = [r for r in RULES.values() if r.id[:3] in ("EG1", "EG3", "EG4")]
    assert {r.key for r in requirement_rules} - {"known_modes"} == set(REQUIREMENT_KEYS)


# ------------------------------------------------------------------ subjects
WELLS = '''\
import numpy as np


def field(x, u):
    return np.array([x[1], x[0] - x[0] ** 3 - 0.2 * x[1]])
'''


def _doc(kind: str, gain: float, requirements: dict | None = None) -> dict:
    if kind == "loop":
        doc = {"model_format": 1, "name": "loop", "plant": {"num": [gain], "den": [1, 3, 2, 0]},
               "feedback": {"output_gain": [[1.0]]}}
    elif kind == "plain":
        doc = {"model_format": 1, "name": "plain", "plant": {"num": [gain],
                                                             "den": [1, 3, 2, gain]}}
    else:
        doc = {"model_format": 1, "name": "wells",
               "vector_field": {"function": "dynamics.wells:field", "states": ["x", "v"],
                                "equilibria": {"box": {"x": [-2.0, 2.0], "v": [-1.0, 1.0]},
                                               "starts": 24}}}
    if requirements:
        doc["requirements"] = requirements
    return doc


def make_repo(root: Path) -> Path:
    (root / "dynamics").mkdir(parents=True, exist_ok=True)
    (root / "dynamics" / "__init__.py").write_text("", encoding="utf-8")
    (root / "dynamics" / "wells.py").write_text(WELLS, encoding="utf-8")
    (root / "pyproject.toml").write_text("[tool.eigengate]\nallow_python = true\n",
                                         encoding="utf-8")
    for kind in ENGINE_SUBJECTS:
        for name, gain in (("calm", 1.0), ("wild", 10.0)):
            text = yaml.safe_dump(_doc(kind, gain), sort_keys=False)
            (root / f"{kind}-{name}.yaml").write_text(text, encoding="utf-8")
    return root


@pytest.fixture(scope="module")
def repo(tmp_path_factory):
    return make_repo(tmp_path_factory.mktemp("table"))


def subject(kind: str, wild: bool, repo: Path) -> tuple[tuple, dict]:
    """(positional arguments, keywords) of a fixture call on ``kind``."""
    gain = 10.0 if wild else 1.0
    g = control.tf([gain], [1.0, 3.0, 2.0, 0.0])
    closed = control.feedback(g, 1)
    base = kind.removeprefix("chain").lstrip("-") or "tf"
    base = {"open": "tf-open"}.get(base, base)
    opened = base.endswith("-open")
    sys = g if opened else closed
    ss = control.ss(sys)
    name = "wild" if wild else "calm"
    args = {"tf": (sys,), "ss": (ss,), "abcd": (ss.A, ss.B, ss.C, ss.D), "ndarray": (ss.A,),
            "model": None, "file": None}
    if base.startswith("model-"):
        which = base.split("-")[1]
        if which == "plain":
            return (from_arrays(ss.A, ss.B, ss.C, ss.D),), {}
        models = load_models(repo / f"{which}-{name}.yaml", allow_python=True)
        return (models[0],), {}  # the vector field's first point carries its set rules
    if base.startswith("file-"):
        return (str(repo / f"{base.split('-')[1]}-{name}.yaml"),), {}
    return args[base.removesuffix("-open")], ({"loop": "open"} if opened else {})


def run_python_cell(key: str, value: Any, kind: str, wild: bool, repo: Path) -> tuple[str, str]:
    """("refused" | "failed" | "passed" | "ignored", text) of one fixture call."""
    args, kw = subject(kind, wild, repo)
    checker = Checker(search=(repo,))
    try:
        if kind.startswith("chain"):  # a chain step asserts at once and returns no results
            checker.of(*args, **kw).meets(**{key: value})
            rules = None
        else:
            results = checker.check(*args, **kw, **{key: value})
            rules = {v.rule for r in results for v in r.verdicts
                     if v.measured not in ("n/a", "not evaluated")}
    except RequirementArgumentError as exc:
        return "refused", str(exc)
    except ModelError as exc:
        return "refused", str(exc)
    except StabilityAssertionError as exc:
        return "failed", str(exc)
    rid = rule_by_key(key).id
    return ("passed" if rules is None or rid in rules else "ignored"), ""


@pytest.mark.parametrize("kind", PYTHON_KINDS)
@pytest.mark.parametrize("key", REQUIREMENT_KEYS)
def test_fixture_cell(key, kind, repo):
    sample = SAMPLES[key]
    outcome, text = run_python_cell(key, sample.bad, kind, sample.wild, repo)
    rid = rule_by_key(key).id
    if evaluable(key, provides_of(kind)):
        strict = kind != "model-vf" or family(key) == "vf"  # one point of the wells: see below
        assert outcome == "failed" or (not strict and outcome == "passed"), (outcome, text)
        if outcome == "failed":
            assert rid in text and "FAIL" in text, text
        if sample.good is not None and family(key) != "vf" and provides_of(kind) != "vf":
            good, text = run_python_cell(key, sample.good, kind, False, repo)
            assert good == "passed", text
    else:
        assert outcome == "refused", (outcome, text)
        assert key in text and "cannot be evaluated" in text, text
    # model-vf is the point (−1, 0) alone, a stable focus: stable and no_saddle hold there.


# ------------------------------------------------------------------ engine: file and policy
def engine_outcome(result, key: str) -> str:
    rid = rule_by_key(key).id
    mine = [f for f in result.findings if f.rule == rid]
    if any(f.severity == "error" and f.measured == "not evaluated" for f in mine):
        return "refused"
    if any(f.severity == "error" for f in mine):
        return "failed"
    verdicts = [v for r in result.results for v in r.verdicts if v.rule == rid]
    return "passed" if verdicts else "ignored"


@pytest.mark.parametrize("subject_kind", ENGINE_SUBJECTS)
@pytest.mark.parametrize("key", REQUIREMENT_KEYS)
def test_model_file_requirements_block_cell(key, subject_kind, tmp_path):
    sample = SAMPLES[key]
    root = make_repo(tmp_path)
    path = root / "cell.yaml"
    doc = _doc(subject_kind, 10.0 if sample.wild else 1.0, {key: sample.bad})
    path.write_text(yaml.safe_dump(doc, sort_keys=False), encoding="utf-8")
    config = parse_config({"allow_python": True}, root=root)
    result = check_file(path, root, config)
    if evaluable(key, subject_kind):
        assert engine_outcome(result, key) == "failed", result.findings
    else:  # the loader refuses the file, naming the key
        assert result.error is not None, result.findings
        assert result.error.field.endswith(f"requirements.{key}"), str(result.error)


@pytest.mark.parametrize("subject_kind", ENGINE_SUBJECTS)
@pytest.mark.parametrize("key", REQUIREMENT_KEYS)
def test_policy_default_cell(key, subject_kind, repo):
    sample = SAMPLES[key]
    config = parse_config({"allow_python": True, "requirements": {key: sample.bad}},
                          root=repo)
    name = "wild" if sample.wild else "calm"
    result = check_file(repo / f"{subject_kind}-{name}.yaml", repo, config)
    outcome = engine_outcome(result, key)
    assert outcome == ("failed" if evaluable(key, subject_kind) else "refused"), \
        result.findings
    if outcome == "refused":
        text = " ".join(f.message for f in result.findings)
        assert f"{key} cannot be evaluated" in text


# ------------------------------------------------------------------ markers, through pytest
MARKER_SUBJECTS = {  # name → (call, what it provides)
    "tf": ("stability.check(closed)", "plain"),
    "tf-open": ("stability.check(loop, loop='open')", "loop"),
    "chain-open": ("stability.of(loop, loop='open').meets()", "loop"),
    "file-plain": ("stability.check('plain-{name}.yaml')", "plain"),
    "file-loop": ("stability.check('loop-{name}.yaml')", "loop"),
    "file-vf": ("stability.check('vf-calm.yaml')", "vf"),
}


def test_marker_cells(pytester):
    make_repo(pytester.path)
    (pytester.path / "pyproject.toml").write_text(textwrap.dedent("""\
        [tool.pytest.ini_options]
        addopts = ["--strict-markers", "-p", "no:cacheprovider"]
        filterwarnings = ["error"]

        [tool.eigengate]
        allow_python = true
        """), encoding="utf-8")
    lines = ["import control", "import pytest", ""]
    cells = {}
    for i, key in enumerate(REQUIREMENT_KEYS):
        sample = SAMPLES[key]
        name, gain = ("wild", 10.0) if sample.wild else ("calm", 1.0)
        for kind, (call, _) in MARKER_SUBJECTS.items():
            test = f"test_{i}_{kind.replace('-', '_')}"
            cells[test] = (key, kind)
            lines += [f"@pytest.mark.stability_requirements(**{{{key!r}: {sample.bad!r}}})",
                      f"def {test}(stability):",
                      f"    loop = control.tf([{gain}], [1.0, 3.0, 2.0, 0.0])",
                      "    closed = control.feedback(loop, 1)",
                      "    " + call.format(name=name), ""]
    (pytester.path / "test_cells.py").write_text("\n".join(lines), encoding="utf-8")
    rec = pytester.inline_run("test_cells.py")
    seen, wrong = set(), []
    for report in rec.getreports("pytest_runtest_logreport"):
        test = report.nodeid.split("::")[-1]
        key, kind = cells[test]
        if report.when == "setup" and report.passed:
            continue
        if report.when == "teardown":
            continue
        seen.add(test)
        text = str(report.longrepr) if report.failed else ""
        expect_eval = evaluable(key, MARKER_SUBJECTS[kind][1])
        if report.passed:
            got = "passed"
        elif "RequirementArgumentError" in text and "cannot be evaluated" in text and key in text:
            got = "refused"
        elif "StabilityAssertionError" in text or "requirements the chain did not state" in text:
            got = "failed" if rule_by_key(key).id in text else "failed without its rule"
        else:
            got = "error: " + text[-300:]
        want = "failed" if expect_eval else "refused"
        if kind == "file-vf" and family(key) == "any":
            want = "failed"  # every point of the double well is checked: some violate each
        if got != want:
            wrong.append((test, key, kind, want, got))
    assert seen == set(cells)
    assert not wrong, "\n".join(map(str, wrong))


# ------------------------------------------------------------------ the numbers themselves
def test_open_loop_margins_match_python_control_and_the_model_file(repo):
    # K/(s(s+1)(s+2)), K = 1: gain margin 6 (15.56 dB) at ω = √2, phase margin ≈ 53.4°
    # (classic textbook example); python-control's stability_margins is the reference.
    g = control.tf([1.0], [1.0, 3.0, 2.0, 0.0])
    gm, pm, _, wpc, wgc = control.stability_margins(g)[:5]
    (result,) = Checker().check(g, loop="open", min_gain_margin_db=6, min_phase_margin_deg=45)
    by_rule = {v.rule: v for v in result.verdicts}
    assert gm == pytest.approx(6.0, rel=1e-6) and wpc == pytest.approx(np.sqrt(2), rel=1e-6)
    assert by_rule["EG301"].measured == pytest.approx(20 * np.log10(gm), rel=1e-8)
    assert by_rule["EG301"].measured == pytest.approx(15.563, abs=1e-3)
    assert by_rule["EG302"].measured == pytest.approx(pm, rel=1e-6)
    assert by_rule["EG302"].measured == pytest.approx(53.4, abs=0.05)
    assert "1.414 rad/s" in by_rule["EG301"].message and f"{wgc:.4g} rad/s" in \
        by_rule["EG302"].message
    # the same loop declared in a model file gives the same margins (one construction)
    (from_file,) = Checker(search=(repo,)).check("loop-calm.yaml", min_gain_margin_db=6,
                                                 min_phase_margin_deg=45)
    for v in from_file.verdicts:
        assert v.measured == pytest.approx(by_rule[v.rule].measured, rel=1e-9)
    # the closed loop's poles are the roots of s³ + 3s² + 2s + 1 (numpy.roots as reference)
    poles = np.sort_complex(np.linalg.eigvals(result.model.A))
    assert np.allclose(poles, np.sort_complex(np.roots([1.0, 3.0, 2.0, 1.0])))


def test_open_loop_as_matrices_and_discrete():
    # a discrete loop through python-control's c2d (zero-order hold), T = 0.1 s; the margins
    # agree with python-control's stability_margins on the same object
    g = control.c2d(control.tf([1.0], [1.0, 3.0, 2.0, 0.0]), 0.1)
    with warnings.catch_warnings():  # python-control evaluates G at its pole z = 1, and warns
        warnings.simplefilter("ignore", RuntimeWarning)
        gm, pm = control.stability_margins(g, method="poly")[:2]
    ss = control.ss(g)
    (result,) = Checker().check(ss.A, ss.B, ss.C, ss.D, sample_period=0.1, loop="open",
                                min_gain_margin_db=1, min_phase_margin_deg=1)
    by_rule = {v.rule: v for v in result.verdicts}
    assert by_rule["EG301"].measured == pytest.approx(20 * np.log10(gm), rel=1e-6)
    assert by_rule["EG302"].measured == pytest.approx(pm, rel=1e-6)


def test_refusals_say_what_would_make_the_key_evaluable(repo):
    g = control.tf([1.0], [1.0, 3.0, 2.0, 0.0])
    with pytest.raises(RequirementArgumentError) as info:
        Checker().check(g, min_gain_margin_db=100, min_phase_margin_deg=89)
    text = str(info.value)
    assert text.startswith("stability.check(): min_gain_margin_db (stated by this call) "
                           "cannot be evaluated on control.TransferFunction (3 states)")
    assert "loop='open'" in text and "feedback block" in text
    with pytest.raises(RequirementArgumentError) as info:
        Checker(search=(repo,)).check("plain-calm.yaml", min_delay_margin=0.1)
    assert "add a feedback block to the model file" in str(info.value)
    with pytest.raises(RequirementArgumentError) as info:
        Checker().check(g, equilibrium_count=1)
    assert "vector_field block" in str(info.value)
    # a point of a vector field alone cannot carry the set-level requirements
    models = load_models(repo / "vf-calm.yaml", allow_python=True)
    with pytest.raises(RequirementArgumentError) as info:
        Checker().check(models[1], equilibrium_count=3)
    assert "judged once per parameter set" in str(info.value)
    with pytest.raises(ValueError, match="loop must be 'open'"):
        Checker().check(g, loop="opened", stable=True)
    with pytest.raises(TypeError, match="loop='open' apply to matrices"):
        Checker(search=(repo,)).check("loop-calm.yaml", loop="open", stable=True)
    with pytest.raises(ModelError, match="must be square"):  # 1 output, 2 inputs
        Checker().check([[-1.0]], [[1.0, 1.0]], [[1.0]], [[0.0, 0.0]], loop="open",
                        stable=True)


def test_the_command_line_fails_a_policy_margin_it_cannot_evaluate(tmp_path):
    # a repository-wide phase-margin target over a loop and a plain model: the loop is
    # measured (53.4°, passes 45), the plain model fails as not evaluated, never "ok"
    root = make_repo(tmp_path)
    (root / "pyproject.toml").write_text(
        "[tool.eigengate]\nallow_python = true\ninclude = ['loop-calm.yaml', 'plain-calm.yaml']"
        "\n\n[tool.eigengate.requirements]\nmin_phase_margin_deg = 45\n", encoding="utf-8")
    done = run_cli("check", "--no-cache", ".", cwd=root)
    assert done.returncode == 1, done.stdout + done.stderr
    assert "min_phase_margin_deg cannot be evaluated" in done.stdout
    assert "plain-calm.yaml" in done.stdout and "Traceback" not in done.stderr
    alone = run_cli("check", "--no-cache", "loop-calm.yaml", cwd=root)
    assert alone.returncode == 0, alone.stdout + alone.stderr
