"""eigengate: gate merges on the stability of control-system models.

The documented Python API is re-exported here, so user code never imports a private path:
``from eigengate import load_models, analyse, check``. The names are imported on first use
(PEP 562), so ``import eigengate`` (which every pytest run does once the plugin is installed)
loads neither numpy nor scipy.
"""

from __future__ import annotations

import importlib

from .version import __version__

TYPE_CHECKING = False  # typing.TYPE_CHECKING, without importing typing at run time
if TYPE_CHECKING:  # pragma: no cover - names for annotations only
    from typing import Any

# public name -> "module" (relative to this package), or "module:attribute" for a renamed one
_EXPORTS = {
    # the model and its sources
    "Model": "model.core", "from_arrays": "model.core", "from_control": "model.core",
    "from_second_order": "model.second_order",
    "ModelError": "errors", "EigengateError": "errors",
    "load_models": "load.loader",
    # analysis
    "Mode": "analysis.modes", "Spectrum": "analysis.modes", "analyse": "analysis.modes",
    "analyse_sparse": "analysis.sparse_modes",
    "Equilibrium": "analysis.equilibrium", "classify": "analysis.equilibrium",
    "LoopParts": "analysis.margins", "LoopTransfer": "analysis.margins",
    "LoopMargins": "analysis.margins", "ChannelMargins": "analysis.margins",
    "Resolvent": "analysis.margins", "loop_transfer": "analysis.margins",
    "channel_loop": "analysis.margins", "siso_margins": "analysis.margins",
    "unstable_poles": "analysis.margins", "disk_gain_range": "analysis.margins",
    "disk_phase": "analysis.margins",
    "VectorField": "analysis.nonlinear", "linearise": "analysis.nonlinear",
    "find_equilibria": "analysis.nonlinear", "jacobians": "analysis.nonlinear",
    "match_modes": "analysis.matching",
    # requirements and findings
    "Verdict": "rules.catalogue", "RULES": "rules.catalogue", "Rule": "rules.catalogue",
    "Requirement": "rules.requirements", "Stability": "rules.requirements",
    "MinDecayRate": "rules.requirements", "MinDamping": "rules.requirements",
    "MaxFrequency": "rules.requirements", "PoleRegion": "rules.requirements",
    "EquilibriumType": "rules.origin_requirements", "NoSaddle": "rules.origin_requirements",
    "DirectionCounts": "rules.origin_requirements", "evaluate": "rules.requirements",
    "KnownMode": "rules.known_modes", "Finding": "rules.findings",
    "ModelResult": "rules.results", "FileResult": "rules.results",
    # the pipeline
    "check_model": "scan.engine", "check_file": "scan.engine", "check_paths": "scan.engine",
    "revision_baseline": "scan.gitrev",
    # the baseline
    "Baseline": "baseline.store", "baseline_entry_from": "baseline.store",
    "merge_write": "baseline.store", "DEFAULT_BASELINE_PATH": "baseline.store:DEFAULT_PATH",
    "compare": "baseline.regressions", "compare_all": "baseline.regressions",
    "Tolerances": "baseline.regressions", "parse_tolerances": "baseline.regressions",
    # reports
    "render_results": "reports.text", "render_json": "reports.json",
    "render_sarif": "reports.sarif", "render_junit": "reports.junit",
    "render_markdown": "reports.markdown", "render_annotations": "reports.annotations",
    "render_html": "reports.html", "pole_map_png": "reports.plots",
    "pole_map_svg": "reports.plots", "phase_portrait_png": "reports.portrait",
    "ReportDependencyError": "reports.figures",
    # the fixture's API, usable without pytest
    "check": "pytest.assertions", "of": "pytest.assertions", "Checker": "pytest.assertions",
    "StabilityAssertionError": "pytest.assertions", "NotAModelError": "pytest.assertions",
    "RequirementArgumentError": "pytest.assertions",
    "points": "pytest.points", "GridSummary": "rules.grid_summary",
}

__all__ = sorted(_EXPORTS) + ["__version__"]

if TYPE_CHECKING:  # pragma: no cover - the same names, for type checkers
    from .analysis.equilibrium import Equilibrium, classify
    from .analysis.margins import (ChannelMargins, LoopMargins, LoopParts, LoopTransfer,
                                   Resolvent, channel_loop, disk_gain_range, disk_phase,
                                   loop_transfer, siso_margins, unstable_poles)
    from .analysis.matching import match_modes
    from .analysis.modes import Mode, Spectrum, analyse
    from .analysis.sparse_modes import analyse_sparse
    from .analysis.nonlinear import VectorField, find_equilibria, jacobians, linearise
    from .baseline.regressions import Tolerances, compare, compare_all, parse_tolerances
    from .baseline.store import DEFAULT_PATH as DEFAULT_BASELINE_PATH
    from .baseline.store import Baseline, baseline_entry_from, merge_write
    from .errors import EigengateError, ModelError
    from .pytest.points import points
    from .rules.grid_summary import GridSummary
    from .load.loader import load_models
    from .model.core import Model, from_arrays, from_control
    from .model.second_order import from_second_order
    from .pytest.assertions import (Checker, NotAModelError, RequirementArgumentError,
                                    StabilityAssertionError, check, of)
    from .reports.annotations import render_annotations
    from .reports.figures import ReportDependencyError
    from .reports.html import render_html
    from .reports.json import render_json
    from .reports.junit import render_junit
    from .reports.markdown import render_markdown
    from .reports.plots import pole_map_png, pole_map_svg
    from .reports.portrait import phase_portrait_png
    from .reports.sarif import render_sarif
    from .reports.text import render_results
    from .rules.catalogue import RULES, Rule, Verdict
    from .rules.findings import Finding
    from .rules.known_modes import KnownMode
    from .rules.origin_requirements import DirectionCounts, EquilibriumType, NoSaddle
    from .rules.requirements import (MaxFrequency, MinDamping, MinDecayRate, PoleRegion,
                                     Requirement, Stability, evaluate)
    from .rules.results import FileResult, ModelResult
    from .scan.engine import check_file, check_model, check_paths
    from .scan.gitrev import revision_baseline


def __getattr__(name: str) -> Any:
    target = _EXPORTS.get(name)
    if target is None:
        raise AttributeError(f"module 'eigengate' has no attribute {name!r}")
    module, _, attribute = target.partition(":")
    value = getattr(importlib.import_module(f".{module}", __name__), attribute or name)
    globals()[name] = value
    return value


def __dir__() -> list[str]:
    return __all__
