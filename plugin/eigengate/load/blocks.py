"""Parsing of a model document's plant, controller, feedback and loop blocks into a Model."""

from __future__ import annotations

import dataclasses
from collections.abc import Mapping
from typing import Any

from ..model.formats import suggest
from .context import (CONTROLLER_SS_KEYS, CONTROLLER_TF_KEYS, FEEDBACK_KEYS, FEEDBACK_KINDS,
                     SO_PLANT_KEYS, SS_KEYS, TF_KEYS, _check_keys, _Ctx, _mapping, _matrix, _requirements)
from .inputs import ModelInputs
from .parameters import parse_parameters
from ..rules.applicability import refuse_unmet
from ..model.core import Model, as_matrix, from_arrays

#: The fields of a plant block and of a controller block, in the order messages list them.
_PLANT_KEYS = tuple(dict.fromkeys(SS_KEYS + TF_KEYS + SO_PLANT_KEYS))
_CONTROLLER_KEYS = tuple(dict.fromkeys(CONTROLLER_SS_KEYS + CONTROLLER_TF_KEYS))
_STRUCTURE = {"state_gain": "closed loop: state feedback",
              "output_gain": "closed loop: output feedback",
              "controller": "closed loop: dynamic controller"}


def _names(block: Mapping[str, Any], key: str, ctx: _Ctx, path: str) -> list[str] | None:
    value = block.get(key)
    if value is None:
        return None
    if not isinstance(value, list) or not all(isinstance(v, str) for v in value):
        raise ctx.err(f"{path}.{key}", f"must be a list of names, got {value!r:.80}")
    return value


def _closed_loop(doc: Mapping[str, Any], ctx: _Ctx, parts: list[dict[str, Any]] | None = None
                 ) -> tuple[Model, str, tuple[Any, Any, Any, Any], Any, list[str]]:
    """The plant block and, with a feedback block, the closed loop: (plant, structure,
    matrices (A, B, C, D), E, state names)."""
    if "plant" not in doc:
        raise ctx.err("plant", "is missing (neither the file nor this operating point gives it)")
    plant_block = _mapping(doc["plant"], ctx, "plant")
    plant, structure = _system(plant_block, ctx, "plant", plant=True)
    if plant.sparse and isinstance(doc.get("feedback"), Mapping) \
            and "controller" in doc["feedback"]:
        raise ctx.err("feedback.controller", "cannot close a dynamic controller around a "
                      "sparse plant (a static state_gain or output_gain can be closed)",
                      "give the closed-loop matrices as the plant, or a plant of at most "
                      "the sparse threshold's states with sparse: false")
    matrices: tuple[Any, Any, Any, Any] = (plant.A, plant.B, plant.C, plant.D)
    e, states = plant.E, list(plant.states)
    if "feedback" in doc:
        feedback = _mapping(doc["feedback"], ctx, "feedback")
        kind, matrices, extra_states = _feedback(feedback, plant, ctx, parts)
        structure = _STRUCTURE[kind]
        states += extra_states
        if e is not None and extra_states:
            import numpy as np

            nc = len(extra_states)  # descriptor plant: controller states are ordinary states
            e = np.block([[e, np.zeros((e.shape[0], nc))],
                          [np.zeros((nc, e.shape[1])), np.eye(nc)]])
    return plant, structure, matrices, e, states


def _loop_matrices(doc: Mapping[str, Any], ctx: _Ctx) -> tuple[Any, Any]:
    """(A, E) of the closed loop of ``doc``: what a parameter box forms at other values."""
    _, _, matrices, e, _ = _closed_loop(doc, ctx)
    return matrices[0], e


def build_model(doc: Mapping[str, Any], ctx: _Ctx, name: str, label: str | None) -> Model:
    parts: list[dict[str, Any]] = []  # plant and controller, for loop margins
    plant, structure, matrices, e, states = _closed_loop(doc, ctx, parts)
    requirements, disabled, known_modes = _requirements(doc, ctx, states)
    on_uncertain = doc.get("on_uncertain")
    if on_uncertain not in (None, "fail", "pass"):
        raise ctx.err("on_uncertain", f"must be 'fail' or 'pass', got {on_uncertain!r}")
    require = doc.get("require")
    if require not in (None, "certified", "estimated"):
        raise ctx.err("require", f"must be 'certified' or 'estimated', got {require!r}")
    fields: dict[str, Any] = dict(
        sample_period=ctx.sample_period, name=name, label=label, source=ctx.source,
        structure=structure, requirements=tuple(requirements), known_modes=tuple(known_modes),
        on_uncertain=on_uncertain, disabled=tuple(disabled), waivers=tuple(ctx.waivers))
    if matrices[0] is plant.A and e is plant.E:
        # no loop closed: the plant's matrices and names are checked already (the loader
        # checked the sample period), so the plant is the model, with the file's fields
        model = plant.with_fields(**fields)
    else:
        model = from_arrays(*matrices, e, states=states, inputs=plant.inputs,
                            outputs=plant.outputs, lines=_lines(ctx),
                            prefix=ctx.prefix, sparse=plant.sparse, **fields)
    for req in requirements:  # a requirement the model cannot be judged by is refused here
        why = req.unfit(model)
        if why is not None:
            raise ctx.err(f"requirements.{req.info.key}", why)
    drift = doc.get("allowed_drift")
    if drift is not None:  # validated here; layered over the policy at comparison time
        from ..baseline.tolerances import parse_tolerances

        parse_tolerances(drift, ctx.source, ctx.prefix + "allowed_drift.", ctx.prefixed_lines())
    box = None
    if "parameters" in doc:
        box = parse_parameters(doc, ctx, model, _loop_matrices)
        if known_modes and any(r.rule == "EG113" for r in requirements):
            raise ctx.err("requirements.robust", "is not evaluated on a model with known_modes "
                          "(they are matched at the nominal values only)",
                          "remove known_modes, or check the range without robust")
    rest = dict(lines=dict(ctx.lines),
                loop_parts=_loop(doc, ctx, parts, requirements, box is not None),
                allowed_drift=drift, require=require, parameters=box,
                file_inputs=ModelInputs.linear(doc, ctx, _loop_matrices))
    if box is not None:  # the box keeps the model it was checked with: a copy
        return model.with_fields(**rest)
    # ``model`` is a new copy that nothing else holds: completed in place (what with_fields
    # would copy it into)
    model.__dict__.update(rest)
    return model


def _lines(ctx: _Ctx) -> dict[str, int]:
    """The field lines for :func:`from_arrays` (which copies them): the context's own without
    a prefix."""
    return ctx.lines if not ctx.prefix else ctx.prefixed_lines()


def _loop(doc: Mapping[str, Any], ctx: _Ctx, parts: list[dict[str, Any]],
          requirements: tuple, parameters: bool = False) -> Any:
    """LoopParts of a closed loop (with the ``loop:`` block applied), or None without one."""
    # a linear model provides a loop (with feedback), parameters (with a parameters block)
    # and nothing else: the rest is refused
    refuse_unmet(requirements, ("loop",) * bool(parts) + ("parameters",) * parameters,
                 ctx.err)
    if not parts:
        if "loop" in doc:
            raise ctx.err("loop", "needs a closed loop, but the model has no feedback block",
                          "add feedback (state_gain, output_gain or controller)")
        return None
    from ..analysis.margins import LoopParts
    from ..rules.loop_requirements import parse_loop_block

    kw = parts[0]
    channels = {"plant_input": kw["inputs"], "plant_output": kw["outputs"]}
    options = parse_loop_block(doc.get("loop", {}), ctx, channels, kw["kind"] == "state_gain")
    return LoopParts(**kw, sample_period=ctx.sample_period, **options)


def _system(block: dict[str, Any], ctx: _Ctx, path: str, *, plant: bool) -> tuple[Model, str]:
    """A plant or controller block, state space or transfer function, as a Model."""
    from ..model import interconnect as ic

    what = "a plant" if plant else "a controller"
    _check_keys(block, _PLANT_KEYS if plant else _CONTROLLER_KEYS, ctx, path, what)
    ss_given = [k for k in ("A", "B", "C", "D", "E") if k in block]
    tf_given = [k for k in ("num", "den") if k in block]
    if ss_given and tf_given:
        raise ctx.err(f"{path}.{tf_given[0]}", f"is given together with {path}.{ss_given[0]}: "
                      f"{what} is either state space (A, B, C, D) or a transfer function "
                      "(num, den), not both", "remove one of the two forms")
    if "second_order" in block and (ss_given or tf_given or "states" in block):
        other = (ss_given + tf_given + ["states"])[0]
        raise ctx.err(f"{path}.{other}", f"is given together with {path}.second_order: the "
                      "plant is either second order (M, D, K, F) or state space or a transfer "
                      "function", "coordinates under second_order name the states")
    if not ss_given and not tf_given and "second_order" not in block:
        raise ctx.err(path, "must give A (state space) or num and den (transfer function), "
                      "got neither")
    if not plant:
        domain = block.get("domain", ctx.domain)
        if domain != ctx.domain:
            raise ctx.err(f"{path}.domain", f"is {domain!r}, but the plant is {ctx.domain}",
                          "plant and controller must share the domain")
        if "sample_period" in block and block["sample_period"] != ctx.sample_period:
            raise ctx.err(f"{path}.sample_period", f"is {block['sample_period']!r}, but the "
                          f"plant's sample period is {ctx.sample_period!r}",
                          "plant and controller must share the sample period")
    prefix = ctx.prefix + path + "."
    if plant and "second_order" in block:
        return _second_order(block, ctx, path), "second order"
    if ss_given:
        if "A" not in block:
            raise ctx.err(f"{path}.A", f"is missing; {path}.{ss_given[0]} is given, so "
                          "this is a state-space block and needs its A matrix")
        if not plant and "E" in block:
            raise ctx.err(f"{path}.E", "is not allowed: controllers are not descriptor systems")
        mats = {k: _matrix(block.get(k), ctx, f"{path}.{k}") for k in ("A", "B", "C", "D", "E")}
        sparse = block.get("sparse")
        if sparse is not None and not isinstance(sparse, bool):
            raise ctx.err(f"{path}.sparse", f"must be true or false, got {sparse!r}",
                          "true keeps sparse matrix files sparse at any size, false makes "
                          "them dense")
        model = from_arrays(**mats, sparse=sparse, states=_names(block, "states", ctx, path),
                            inputs=_names(block, "inputs", ctx, path),
                            outputs=_names(block, "outputs", ctx, path), source=ctx.source,
                            lines=_lines(ctx), prefix=prefix)
        return model, "descriptor" if model.E is not None else "state-space"
    for k in ("num", "den"):
        if k not in block:
            raise ctx.err(f"{path}.{k}", "is missing; a transfer function needs num and den")
    nums, dens = _tf_entries(block, ctx, path)
    try:
        if len(nums) == 1 and len(nums[0]) == 1:
            a, b, c, d = ic.tf_siso(nums[0][0], dens[0][0])
        else:
            a, b, c, d = ic.tf_mimo(nums, dens)
    except ic.InterconnectError as exc:  # a zero denominator is the den field's fault
        raise ctx.err(f"{path}.den" if "zero denominator" in str(exc) else f"{path}.num",
                      str(exc)) from None
    if plant and a.shape[0] == 0:
        raise ctx.err(f"{path}.den", "gives a static gain with no states; eigengate needs a "
                      "plant with at least one state")
    if not a.shape[0]:
        return _static(d, ctx), "transfer function"
    # states, when named, follow the realisation: controllable canonical form, column by column
    model = from_arrays(a, b, c, d, states=_names(block, "states", ctx, path),
                        inputs=_names(block, "inputs", ctx, path),
                        outputs=_names(block, "outputs", ctx, path), source=ctx.source,
                        lines=_lines(ctx), prefix=prefix)
    return model, "transfer function"


def _second_order(block: dict[str, Any], ctx: _Ctx, path: str) -> Model:
    """A ``second_order:`` plant block (``M q'' + D q' + K q = F u``) in companion form."""
    from ..model.second_order import SECOND_ORDER_KEYS, from_second_order

    where = f"{path}.second_order"
    so = _mapping(block["second_order"], ctx, where)
    _check_keys(so, SECOND_ORDER_KEYS, ctx, where, "a second-order plant")
    for key in ("M", "K"):
        if key not in so:
            raise ctx.err(f"{where}.{key}", "is missing; a second-order plant needs M and K")
    sparse = block.get("sparse")
    if sparse is not None and not isinstance(sparse, bool):
        raise ctx.err(f"{path}.sparse", f"must be true or false, got {sparse!r}")
    mats = {k: _matrix(so.get(k), ctx, f"{where}.{k}") for k in ("M", "D", "K", "F", "Cq", "Cv")}
    coords = _names(so, "coordinates", ctx, where)
    return from_second_order(**mats, coordinates=coords, sparse=sparse,
                             inputs=_names(block, "inputs", ctx, path),
                             outputs=_names(block, "outputs", ctx, path), source=ctx.source,
                             lines=ctx.prefixed_lines(), prefix=ctx.prefix + where + ".")


def _static(d: Any, ctx: _Ctx) -> Model:
    # A controller that is a pure gain has no states; Model needs one, so carry D alone.
    import numpy as np

    return Model(name="controller", A=np.zeros((0, 0)), B=np.zeros((0, d.shape[1])),
                 C=np.zeros((d.shape[0], 0)), D=d, source=ctx.source,
                 inputs=tuple(f"u{i + 1}" for i in range(d.shape[1])),
                 outputs=tuple(f"y{i + 1}" for i in range(d.shape[0])))


def _tf_entries(block: Mapping[str, Any], ctx: _Ctx, path: str
                ) -> tuple[list[list[Any]], list[list[Any]]]:
    """Coefficient rows of num and den: [[row]] for SISO, nested for a matrix."""
    def coeffs(value: Any, where: str) -> Any:
        if isinstance(value, list) and any(isinstance(v, list) for v in value):
            raise ctx.err(where, f"must be one list of coefficients, got a nested list "
                          f"{value!r:.60}", "a matrix transfer function is a list of rows "
                          "of coefficient lists")
        c = as_matrix(value, ctx.source, ctx.prefix + where, line=ctx.line(where),
                      allow_vector=True).ravel()
        if not c.size:
            raise ctx.err(where, "has no coefficients; expected a list of at least one "
                          "coefficient, highest power first (write [0] for a zero entry)")
        return c

    def siso(value: Any) -> bool:
        return not isinstance(value, list) or all(not isinstance(v, list) for v in value)

    num, den = block["num"], block["den"]
    if siso(num):
        if not siso(den):
            raise ctx.err(f"{path}.den", "must be one coefficient list, like num, got a matrix")
        return [[coeffs(num, f"{path}.num")]], [[coeffs(den, f"{path}.den")]]
    rows = []
    for i, row in enumerate(num):
        if not isinstance(row, list):
            raise ctx.err(f"{path}.num", f"must be a matrix of coefficient lists, row {i + 1} "
                          f"is {row!r}")
        rows.append([coeffs(e, f"{path}.num[{i}][{j}]") for j, e in enumerate(row)])
    if siso(den):  # one denominator shared by every entry
        shared = coeffs(den, f"{path}.den")
        return rows, [[shared] * len(r) for r in rows]
    shape = [len(r) for r in rows]
    if not isinstance(den, list) or len(den) != len(rows) or any(
            not isinstance(r, list) or len(r) != n for r, n in zip(den, shape)):
        raise ctx.err(f"{path}.den", f"must have the shape of num (rows of lengths {shape}) "
                      "or be one coefficient list shared by every entry")
    return rows, [[coeffs(e, f"{path}.den[{i}][{j}]") for j, e in enumerate(r)]
                  for i, r in enumerate(den)]


def _select(names: list[str] | None, available: tuple[str, ...], ctx: _Ctx, path: str,
            what: str) -> list[int]:
    if names is None:
        return list(range(len(available)))
    picked: list[int] = []
    for n in names:
        if n not in available:
            close = suggest(n, available)
            raise ctx.err(path, f"names {n!r}, which is not a plant {what} (plant {what}s: "
                          f"{', '.join(available) or 'none'})",
                          f"did you mean {close!r}?" if close else None)
        if available.index(n) in picked:
            raise ctx.err(path, f"names {n!r} twice")
        picked.append(available.index(n))
    return picked


def _feedback(block: dict[str, Any], plant: Model, ctx: _Ctx,
              parts: list[dict[str, Any]] | None = None) -> tuple[str, tuple, list[str]]:
    from ..model import interconnect as ic

    _check_keys(block, FEEDBACK_KEYS, ctx, "feedback", "feedback")
    kinds = [k for k in FEEDBACK_KINDS if k in block]
    if len(kinds) != 1:
        raise ctx.err("feedback", f"must give exactly one of {', '.join(FEEDBACK_KINDS)}, got "
                      f"{', '.join(kinds) if kinds else 'none'}")
    kind = kinds[0]
    ins = _select(_names(block, "inputs", ctx, "feedback"), plant.inputs, ctx,
                  "feedback.inputs", "input")
    if not ins:
        raise ctx.err("feedback.inputs", "selects no plant inputs; the plant has no inputs "
                      "(B has no columns)" if not plant.inputs else "must not be empty")
    if kind == "state_gain" and "outputs" in block:
        raise ctx.err("feedback.outputs", "is not used by state_gain, which feeds back states")
    outs = _select(_names(block, "outputs", ctx, "feedback"), plant.outputs, ctx,
                   "feedback.outputs", "output")
    if kind != "state_gain" and not outs:
        raise ctx.err("feedback.outputs", "selects no plant outputs; the plant has no outputs "
                      "(C has no rows)" if not plant.outputs else "must not be empty")
    a, b, c, d = plant.A, plant.B, plant.C, plant.D
    n, m_sel, p_sel = a.shape[0], len(ins), len(outs)

    def keep(cm, dm, names, ac, bc, cc, dc) -> None:  # plant and controller, for margins
        if parts is not None:
            parts.append(dict(kind=kind, A=a, B=b[:, ins], C=cm, D=dm[:, ins], E=plant.E,
                              Ac=ac, Bc=bc, Cc=cc, Dc=dc,
                              inputs=tuple(plant.inputs[i] for i in ins), outputs=tuple(names)))
    try:
        if kind in ("state_gain", "output_gain"):
            k = as_matrix(_matrix(block[kind], ctx, f"feedback.{kind}"), ctx.source,
                          ctx.prefix + f"feedback.{kind}", line=ctx.line(f"feedback.{kind}"))
            cols = n if kind == "state_gain" else p_sel
            if k.shape != (m_sel, cols):
                why = "plant states" if kind == "state_gain" else "measured outputs"
                raise ctx.err(f"feedback.{kind}", f"must be {m_sel}×{cols} (driven inputs × "
                              f"{why}), got {k.shape[0]}×{k.shape[1]}")
            import numpy as np

            if plant.sparse:  # kept sparse: no loop parts (margins need a dense plant)
                from ..model.sparse_loop import sparse_gain_feedback

                return kind, sparse_gain_feedback(a, b, c, d, k, ins, None if kind ==
                                                  "state_gain" else outs), []
            if kind == "state_gain":
                keep(np.eye(n), np.zeros((n, b.shape[1])), plant.states, np.zeros((0, 0)),
                     np.zeros((0, n)), np.zeros((m_sel, 0)), k)
                return kind, ic.state_feedback(a, b, c, d, k, ins), []
            keep(c[outs, :], d[outs, :], [plant.outputs[i] for i in outs], np.zeros((0, 0)),
                 np.zeros((0, p_sel)), np.zeros((m_sel, 0)), k)
            return kind, ic.output_feedback(a, b, c, d, k, ins, outs), []
        ctrl_block = _mapping(block["controller"], ctx, "feedback.controller")
        ctrl, _ = _system(ctrl_block, ctx, "feedback.controller", plant=False)
        path = "feedback.controller"
        if ctrl.B.shape[1] != p_sel:
            raise ctx.err(f"{path}.B" if ctrl.n_states else f"{path}.D",
                          f"must have {p_sel} columns (one per measured plant output), "
                          f"got {ctrl.D.shape[1] if not ctrl.n_states else ctrl.B.shape[1]}")
        if ctrl.C.shape[0] != m_sel:
            raise ctx.err(f"{path}.C" if ctrl.n_states else f"{path}.D",
                          f"must have {m_sel} rows (one per driven plant input), got "
                          f"{ctrl.C.shape[0]}")
        extra = [f"ctrl.x{i + 1}" for i in range(ctrl.n_states)]
        if "states" in ctrl_block:
            extra = list(ctrl.states)
        for s in extra:
            if s in plant.states:
                raise ctx.err(f"{path}.states", f"names {s!r}, which is also a plant state",
                              "controller and plant states need different names")
        keep(c[outs, :], d[outs, :], [plant.outputs[i] for i in outs], ctrl.A, ctrl.B, ctrl.C,
             ctrl.D)
        return kind, ic.dynamic_feedback(a, b, c, d, ctrl.A, ctrl.B, ctrl.C, ctrl.D,
                                         ins, outs), extra
    except ic.InterconnectError as exc:
        raise ctx.err(f"feedback.{kind}", str(exc)) from None
