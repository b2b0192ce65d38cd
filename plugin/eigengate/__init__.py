"""eigengate: gate merges on the stability of control-system models.

The public names are re-exported here and imported on first use, so ``import eigengate``
(which every pytest run does once the plugin is installed) loads neither numpy nor scipy.
"""

from __future__ import annotations

import importlib
from typing import Any

__version__ = "0.1.0"

_EXPORTS = {
    "Model": "model.core", "from_arrays": "model.core", "from_control": "model.core",
    "ModelError": "errors", "EigengateError": "errors",
    "load_models": "load.loader",
    "Mode": "analysis.modes", "Spectrum": "analysis.modes", "analyse": "analysis.modes",
    "Equilibrium": "analysis.equilibrium", "classify": "analysis.equilibrium",
    "Verdict": "rules.requirements", "Requirement": "rules.requirements", "Stability": "rules.requirements",
    "MinDecayRate": "rules.requirements", "MinDamping": "rules.requirements",
    "MaxFrequency": "rules.requirements", "PoleRegion": "rules.requirements",
    "EquilibriumType": "rules.requirements", "NoSaddle": "rules.requirements",
    "DirectionCounts": "rules.requirements", "KnownMode": "rules.known_modes",
    "evaluate": "rules.requirements", "RULES": "rules.catalogue", "Rule": "rules.catalogue",
    "Finding": "rules.findings",
    "check_model": "scan.engine", "check_file": "scan.engine", "check_paths": "scan.engine",
    "ModelResult": "scan.engine", "FileResult": "scan.engine",
}

__all__ = sorted(_EXPORTS) + ["__version__"]


def __getattr__(name: str) -> Any:
    module = _EXPORTS.get(name)
    if module is None:
        raise AttributeError(f"module 'eigengate' has no attribute {name!r}")
    value = getattr(importlib.import_module(f".{module}", __name__), name)
    globals()[name] = value
    return value


def __dir__() -> list[str]:
    return __all__
