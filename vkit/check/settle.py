"""Reset fill: which output sync activity is the pipeline's reset value rather than a frame.

A design whose sync delay registers reset to 0 shows, at a timing with negative syncs, a sync "pulse"
from the first clock after reset until its pipeline has filled: activity no input caused. By default
the output controls are judged from the first output pixel (the first output data-enable of the first
frame): an output sync leading edge before it that also comes before the input's first pulse of that
sync cannot come from the input and is left out of the pulse counts, with a warning naming its clock
range. A declared settle time leaves out every output sync edge before it; ``strict`` leaves out nothing
(every edge counts from the first clock after reset). Edges inside the run are always counted, so a
real extra or missing pulse still fails.
"""

from __future__ import annotations

from dataclasses import dataclass, replace

from vkit.core.errors import ConfigError
from vkit.video.capture import RunFacts
from vkit.video.words import sync_counts

__all__ = ["ControlSettle", "settled_facts"]


@dataclass(frozen=True)
class ControlSettle:
    """From when output controls are judged.

    Attributes:
        clocks: a declared settle time, clocks after reset: every output sync edge before it is left out;
            None: from the first output pixel, leaving out only edges the input cannot have caused.
        strict: judge from the first clock after reset (nothing is left out); wins over ``clocks``.
    """

    clocks: int | None = None
    strict: bool = False

    def __post_init__(self) -> None:
        if self.clocks is not None and (isinstance(self.clocks, bool) or int(self.clocks) < 0):
            raise ConfigError(f"settle: clocks = {self.clocks!r} is not a clock count; give an integer >= 0 or None")


def _kept(edges: list[int], before: int | None, input_first: int | None, declared: bool) -> tuple[list[int], list[int]]:
    """(kept, left out) edges: before ``before`` and (unless declared) before the input's first edge."""
    if before is None:
        return list(edges), []
    out = [e for e in edges if e < before and (declared or input_first is None or e < input_first)]
    return [e for e in edges if e not in out], out


def settled_facts(facts: RunFacts, settle: ControlSettle | None) -> tuple[RunFacts, str | None]:
    """The run facts with the output sync counts judged from the settle point, and the warning line.

    Returns ``facts`` itself (and no warning) when nothing is left out, the settle is strict, or the
    capture has no edge clocks (an older capture).
    """
    settle = settle or ControlSettle()
    vs, hs = facts.output_vsync_clocks, facts.output_hsync_clocks
    if settle.strict or vs is None or hs is None:
        return facts, None
    declared = settle.clocks is not None
    before = int(settle.clocks) if declared else facts.first_output_clock
    vs_kept, vs_out = _kept(vs, before, facts.input_first_vsync_clock, declared)
    hs_kept, hs_out = _kept(hs, before, facts.input_first_hsync_clock, declared)
    if not vs_out and not hs_out:
        return facts, None
    left = sorted(vs_out + hs_out)
    judged = replace(facts, output_vsync_count=len(vs_kept), output_hsync_per_frame=sync_counts(hs_kept, vs_kept),
                     output_vsync_clocks=vs_kept, output_hsync_clocks=hs_kept)
    what = "declared settle time" if declared else "first output pixel"
    warning = (f"output sync activity before the {what} (clock {before}) left out as reset fill: "
               f"{len(vs_out)} vsync and {len(hs_out)} hsync leading edge(s) at clocks {left[0]}..{left[-1]}; "
               f"set strict_controls = true to count them")
    return judged, warning
