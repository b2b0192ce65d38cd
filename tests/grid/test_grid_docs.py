"""docs/grids.md: its model file validates against the model schema, and what it says about
grids combined with parameter boxes holds."""

import json
import re
from importlib.resources import files
from pathlib import Path

import jsonschema
import pytest
from gridcase import stacked_repo

from eigengate import check_file
from eigengate.model.formats import parse_text

DOC = Path(__file__).resolve().parents[2] / "docs" / "grids.md"


def test_the_documented_grid_file_validates_against_the_model_schema():
    schema = json.loads(files("eigengate").joinpath("schema/model-v1.schema.json")
                        .read_text(encoding="utf-8"))
    blocks = re.findall(r"```yaml\n(.*?)```", DOC.read_text(encoding="utf-8"), re.S)
    assert blocks
    for body in blocks:
        data, _ = parse_text(body, ".yaml", "grids.yaml")
        jsonschema.Draft202012Validator(schema).validate(data)


def test_each_grid_point_gets_the_parameter_box_around_its_own_matrices(tmp_path):
    # k2 = 1 + d, d in [-0.2, 0.2]: closed loop s² + (load + 1 + d) s + 1.5 speed, a complex
    # pair at every point (load + 1.2 < √6), so the worst decay rate is (load + 0.8) / 2
    # (second-order standard form): 0.4 at load 0, below the required 0.45; 0.65 and 0.9 pass
    extra = ("parameters:\n  d: {nominal: 0, range: [-0.2, 0.2], "
             "affects: {feedback.state_gain: [[0, 1]]}}\n")
    path = stacked_repo(tmp_path, requirements="robust: {min_decay_rate: 0.45}", extra=extra)
    result = check_file(path, root=tmp_path)
    failed = sorted(r.model.point_id for r in result.results if not r.passed)
    assert failed == [f"speed={s},load=0" for s in (1, 2, 3, 4)]
    for p in result.grid.points:
        load = dict(p.coords)["load"]
        assert p.margin == pytest.approx((load + 0.8) / 2 - 0.45, abs=1e-6)
