"""Verdicts on a partial spectrum: the modes a sparse search found, and what it covered.

A sparse model's spectrum (:mod:`eigengate.analysis.sparse_modes`) holds only the modes an
iterative search found in the regions its requirements judge. A requirement that reads one
region (stability, a decay rate, damping, frequency, a pole region: its ``targets``) is
judged on those modes and on the search's coverage:

* a violating mode found is a failure like any other (its residual bound decides how
  surely), labelled as found by the search, never certified by it;
* when Bendixson's rectangle misses the region, no eigenvalue can lie there at all: the pass
  is certified (a proof from rigorous row sums, not from the search);
* when the searched discs cover the region inside the rectangle, the pass is labelled
  "no eigenvalue found …, the search covered …" and decided ``estimated`` at best: Arnoldi can
  miss an eigenvalue, so a search is never a certificate;
* when they do not, the verdict is uncertain (it fails unless ``on_uncertain: pass``) and
  says which part was not searched.

A requirement that needs the whole spectrum (equilibrium type, direction counts, margins,
robustness figures: ``targets()`` is None) fails with "cannot be evaluated on a partial
spectrum", never passes unseen.
"""

from __future__ import annotations

from ..errors import counted
from dataclasses import replace
from typing import Any, Iterable, Sequence

from ..analysis.sparse_modes import Target
from .catalogue import Verdict

__all__ = ["search_targets", "partial_verdict"]

_RIGHT_HALF = Target("right", 0.0)


def search_targets(requirements: Iterable[Any]) -> tuple[Target, ...]:
    """The regions a sparse search must cover for ``requirements`` (stability's closed right
    half-plane when none of them names one)."""
    out: list[Target] = []
    for r in requirements:
        found = getattr(r, "targets", lambda: None)()
        out.extend(found or ())
    return tuple(dict.fromkeys(out)) or (_RIGHT_HALF,)


def partial_verdict(req: Any, modes: Sequence[Any], spectrum: Any, policy: str) -> Verdict:
    """The verdict of ``req`` on a partial spectrum (see the module docstring)."""
    search = spectrum.search
    targets = req.targets()
    if targets is None:
        return req._verdict(
            passed=False, uncertain=False, measured="not evaluated",
            threshold=req.spec().split(": ", 1)[-1], margin=None, offending=(),
            message=f"{req.info.key} cannot be evaluated on a partial spectrum: it needs every "
            f"eigenvalue, and the {search.coverage()}; a requirement that cannot be evaluated "
            "fails",
            suggestion=f"switch it off for this model ({req.info.key}: false), or give a model "
            "small enough for the dense analysis (sparse: false)")
    v = req.check(modes, spectrum, policy)
    where = " or ".join(t.describe() for t in targets)
    label = f"found by an iterative search ({search.coverage()})"
    if not v.passed and not v.uncertain:  # a violating mode was found: a real failure
        return replace(v, decided_by="estimated" if v.decided_by == "certified" else
                       v.decided_by, message=f"{v.message}; {label}")
    proofs = getattr(search, "proof", lambda t: None)
    if all(search.excluded(t) or proofs(t) for t in targets):
        bound = ("Gershgorin's theorem bounds every |z| by the largest row sum of |A|"
                 if getattr(search, "sample_period", None) is not None else
                 "Bendixson's theorem with Gershgorin bounds of the symmetric and "
                 "skew-symmetric parts of A excludes it")
        how = "; ".join(dict.fromkeys(bound if search.excluded(t) else str(proofs(t))
                                      for t in targets))
        return replace(v, passed=True, uncertain=False, decided_by="certified",
                       message=f"{v.message}; no eigenvalue can lie where {where}: {how} "
                       "(certified)", suggestion=None)
    gaps = [(t, g) for t in targets if not (search.excluded(t) or proofs(t))
            for g in search.uncovered(t)]
    if gaps:
        passed = policy == "pass"
        t, (x0, x1, y0, y1) = gaps[0]
        return replace(v, passed=passed, uncertain=True, decided_by="uncertain",
                       message=f"no eigenvalue found where {where} beyond the modes listed, "
                       f"but the search did not cover all of it: {counted(len(gaps), 'part')} not "
                       f"searched, e.g. {x0:.6g} ≤ Re s ≤ {x1:.6g}, {y0:.6g} ≤ |Im s| ≤ "
                       f"{y1:.6g} ({t.describe()}); {label}; verdict "
                       f"{'passed' if passed else 'failed'} by the on_uncertain={policy} policy",
                       suggestion=None if passed else "give the sparse search a smaller "
                       "region (a tighter requirement), or a model small enough for the dense "
                       "analysis")
    decided = "estimated" if v.decided_by == "certified" else v.decided_by
    return replace(v, decided_by=decided,
                   message=f"{v.message}; no eigenvalue found where {where} other than the "
                   f"modes listed, and the search covered that region: {label}; a search, "
                   "not a certificate")
