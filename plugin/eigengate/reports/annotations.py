"""CI annotations: one workflow-command line per finding, which CI services that read them
turn into annotations on the changed file.

``::error file=models/osc.yaml,line=8,title=EG103 damping-ratio::osc: 1 mode violates ...``
(``::warning`` for warnings). The message holds the model title, the finding's message, the
offending modes and the hint, one per line. The command syntax needs ``%``, carriage return
and line feed escaped in the message, and in property values also ``:`` and ``,``; other
control characters from model files are written as escapes before that (``_escape``). Waived
findings are left out: a waiver is a reviewed decision, not something to point at again.
"""

from __future__ import annotations

from typing import Any, Iterable

from .escape import printable
from .render import all_findings, finding_summary

__all__ = ["render_annotations", "annotation", "escape_data", "escape_property"]


def escape_data(text: str) -> str:
    """Escape a command's message: ``%`` → ``%25``, CR → ``%0D``, LF → ``%0A``."""
    return text.replace("%", "%25").replace("\r", "%0D").replace("\n", "%0A")


def escape_property(text: str) -> str:
    """Escape a property value: as :func:`escape_data`, and ``:`` → ``%3A``, ``,`` → ``%2C``."""
    return escape_data(text).replace(":", "%3A").replace(",", "%2C")


def annotation(f: Any) -> str:
    """The workflow-command line of one finding (without line end)."""
    props = [f"file={escape_property(printable(f.source))}"]
    if f.line:
        props.append(f"line={int(f.line)}")
    props.append(f"title={escape_property(f'{f.rule} {f.name}')}")
    command = "error" if f.severity == "error" else "warning"
    message = "\n".join(printable(line, lines=True) for line in finding_summary(f))
    return f"::{command} {','.join(props)}::{escape_data(message)}"


def render_annotations(results: Iterable[Any]) -> str:
    """Render every finding of :class:`~eigengate.scan.engine.FileResult` objects as annotation
    lines, in file order; an empty string when there is none."""
    lines = [annotation(f) for _, _, f in all_findings(results)]
    return "".join(line + "\n" for line in lines)
