"""How a verdict was decided, `require: certified`, and stability under ulp perturbations.

References, named beside each check: the second-order standard form s² + 2ζωn s + ωn²
(common in control textbooks); Gershgorin's theorem and Bauer & Fike (1960) for what a
certified enclosure means; the block-diagonal modal form of a lightly damped structure, whose
blocks [[-ζω, ωd], [-ωd, -ζω]] have eigenvalues -ζω ± iωd (common practice).
"""

from __future__ import annotations

import json
import math

import numpy as np
import pytest

import eigengate as eg
from eigengate.scan.config import ConfigError, parse_config
from eigengate.scan.engine import check_model
from eigengate.errors import ModelError
from eigengate.load.loader import load_models
from eigengate.rules.requirements import MinDamping, MinDecayRate, Stability, evaluate
from support import run_cli, write
from test_bounds_corpus import CASES, flexible, true_decay, truth_of

#: s² + 0.4 s + 4: ζ = 0.1, ωn = 2, poles -0.2 ± 1.98997j (second-order standard form).
OSC = [[0.0, 1.0], [-4.0, -0.4]]


def test_small_standard_model_is_certified_and_descriptor_only_estimated():
    # Gershgorin discs exist for standard models up to 400 states; the generalized problem
    # (descriptor E) gets the first-order estimate only.
    sp = eg.analyse(eg.from_arrays(OSC))
    assert all(math.isfinite(m.enclosure) for m in sp.modes)
    assert abs(sp.modes[0].s - complex(-0.2, math.sqrt(4 - 0.04))) <= sp.modes[0].enclosure
    v = evaluate(sp, [MinDamping(0.05)])[0]
    assert v.passed and v.decided_by == "certified"
    desc = eg.analyse(eg.from_arrays(np.array(OSC) * 2.0, E=2.0 * np.eye(2) + [[0, 1e-3], [0, 0]]))
    assert all(math.isinf(m.enclosure) for m in desc.modes)
    v = evaluate(desc, [MinDamping(0.05)])[0]
    assert v.passed and v.decided_by == "estimated"


def test_require_certified_makes_an_estimated_verdict_uncertain():
    desc = eg.analyse(eg.from_arrays(np.array(OSC), E=np.eye(2) + [[0, 1e-3], [0, 0]]))
    for policy in ("fail", "pass"):
        v = evaluate(desc, [Stability()], on_uncertain=policy, require="certified")[0]
        assert v.uncertain and v.decided_by == "uncertain" and v.passed == (policy == "pass")
        assert "require: certified" in v.message
    # A certified verdict is untouched by the policy.
    v = evaluate(eg.analyse(eg.from_arrays(OSC)), [Stability()], require="certified")[0]
    assert v.passed and not v.uncertain and v.decided_by == "certified"
    with pytest.raises(ValueError, match="require"):
        evaluate(desc, [Stability()], require="sometimes")


def test_failures_are_certified_by_one_violating_mode():
    # ζ = 0.1 < 0.3 with a certified enclosure far smaller than the gap.
    v = evaluate(eg.analyse(eg.from_arrays(OSC)), [MinDamping(0.3)])[0]
    assert not v.passed and not v.uncertain and v.decided_by == "certified"
    v = evaluate(eg.analyse(eg.from_arrays([[0.5, 0.0], [0.0, -1.0]])), [Stability()])[0]
    assert not v.passed and v.decided_by == "certified"


def test_policy_key_require_in_config_overrides_and_model_files(tmp_path):
    cfg = parse_config({"require": "estimated",
                        "overrides": [{"paths": ["models/flight/**"], "require": "certified"}]},
                       root=tmp_path)
    assert cfg.require_for("models/flight/a.yaml") == "certified"
    assert cfg.require_for("models/ground/a.yaml") == "estimated"
    for bad in ({"require": "always"}, {"overrides": [{"paths": ["x"], "require": True}]}):
        with pytest.raises(ConfigError, match="require.*must be 'certified' or 'estimated'"):
            parse_config(bad, root=tmp_path)
    # A descriptor model under the flight folder: estimated only, so uncertain, so it fails.
    model = eg.from_arrays(OSC, E=np.eye(2) + [[0, 1e-3], [0, 0]],
                           source="models/flight/a.yaml", requirements=(Stability(),))
    flight = check_model(cfg.effective(model), cfg)
    assert flight.verdicts[0].decided_by == "uncertain" and not flight.verdicts[0].passed
    assert flight.findings and flight.findings[0].decided_by == "uncertain"
    ground = check_model(cfg.effective(eg.from_arrays(
        OSC, E=np.eye(2) + [[0, 1e-3], [0, 0]], source="models/ground/a.yaml",
        requirements=(Stability(),))), cfg)
    assert ground.verdicts[0].passed and ground.verdicts[0].decided_by == "estimated"

    path = write(tmp_path / "m.yaml", """\
        model_format: 1
        name: m
        require: certified
        plant:
          A: [[0, 1], [-4, -0.4]]
        requirements:
          stable: true
        """)
    (m,) = load_models(path, root=tmp_path)
    assert m.require == "certified"
    path.write_text(path.read_text().replace("require: certified", "require: maybe"))
    with pytest.raises(ModelError) as err:
        load_models(path, root=tmp_path)
    assert err.value.field == "require" and "maybe" in err.value.problem


def test_reports_carry_decided_by(tmp_path):
    # The oscillator fails min_damping 0.3 (ζ = 0.1), certified.
    write(tmp_path / "pyproject.toml", "[tool.eigengate]\ninclude = ['models/*.yaml']\n")
    write(tmp_path / "models" / "osc.yaml", """\
        model_format: 1
        name: osc
        plant:
          A: [[0, 1], [-4, -0.4]]
        requirements:
          min_damping: 0.3
        """)
    out = run_cli("check", "models", "--no-cache", "-o", "json:r.json", "-o", "sarif:r.sarif",
                  "-o", "markdown:r.md", cwd=tmp_path)
    assert out.returncode == 1, out.stderr
    assert "decided: certified" in out.stdout
    doc = json.loads((tmp_path / "r.json").read_text(encoding="utf-8"))
    model = doc["files"][0]["models"][0]
    assert model["verdicts"][0]["decided_by"] == "certified"
    assert model["findings"][0]["decided_by"] == "certified"
    sarif = json.loads((tmp_path / "r.sarif").read_text(encoding="utf-8"))
    assert sarif["runs"][0]["results"][0]["properties"]["decidedBy"] == "certified"
    assert "decided: certified" in (tmp_path / "r.md").read_text(encoding="utf-8")


def _verdict_grid(A, T, alpha_true, zeta_true):
    sp = eg.analyse(eg.from_arrays(A, sample_period=T))
    out = []
    for rel in (-1e-9, -1e-7, -1e-5, 1e-9, 1e-7, 1e-5):
        reqs = [MinDecayRate(alpha_true - rel * max(abs(alpha_true), 1.0))]
        if zeta_true is not None:
            reqs.append(MinDamping(zeta_true * (1 + rel)))
        out.extend((v.passed, v.decided_by) for v in evaluate(sp, reqs))
    return out


def test_no_decided_verdict_flips_under_a_few_ulps_of_perturbation():
    # Stable across machines: a different BLAS or LAPACK path changes the computed eigenpairs
    # by round-off, which a perturbation of the input by a few ulps imitates (seeded). A
    # decided verdict may become uncertain, never the opposite outcome.
    rng = np.random.default_rng(424242)
    cases = [(A, T, true_decay(truth_of(A, truth), T), None)
             for name, A, T, well, truth in CASES if well]
    F, ev = flexible(np.random.default_rng(3), 60)
    cases.append((F, None, float(-ev.real.max()), float(np.min(-ev.real / np.abs(ev)))))
    flips = decided = 0
    for A, T, alpha, zeta in cases:
        base = _verdict_grid(A, T, alpha, zeta)
        for _ in range(3):
            ulps = rng.integers(-4, 5, A.shape)
            B = A + ulps * np.spacing(A)
            for (p0, d0), (p1, d1) in zip(base, _verdict_grid(B, T, alpha, zeta)):
                if d0 != "uncertain" and d1 != "uncertain":
                    decided += 1
                    flips += p0 != p1
    assert decided > 100 and flips == 0
