"""eigengate: gate merges on the stability of control-system models.

The public names are re-exported here and imported on first use, so ``import eigengate``
(which every pytest run does once the plugin is installed) loads neither numpy nor scipy.
"""

from __future__ import annotations

import importlib
from typing import Any

__version__ = "0.1.0"

_EXPORTS = {
    "Model": "model", "from_arrays": "model", "from_control": "model",
    "ModelError": "errors", "EigengateError": "errors",
    "load_models": "loader",
    "Mode": "modes", "Spectrum": "modes", "analyse": "modes",
    "Equilibrium": "equilibrium", "classify": "equilibrium",
    "Verdict": "requirements", "Requirement": "requirements", "Stability": "requirements",
    "MinDecayRate": "requirements", "MinDamping": "requirements",
    "MaxFrequency": "requirements", "PoleRegion": "requirements",
    "EquilibriumType": "requirements", "NoSaddle": "requirements",
    "DirectionCounts": "requirements", "KnownMode": "known_modes",
    "evaluate": "requirements", "RULES": "rules", "Rule": "rules",
    "Finding": "findings",
    "check_model": "engine", "check_file": "engine", "check_paths": "engine",
    "ModelResult": "engine", "FileResult": "engine",
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
