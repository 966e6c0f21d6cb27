"""Helpers shared by the sources, sinks and monitors: fast signal reads, reset, the clock handle, base classes."""

from __future__ import annotations

from collections.abc import Callable, Mapping
from pathlib import Path
from typing import Any

import cocotb
from cocotb.triggers import ClockCycles, Event, RisingEdge

from vkit.video.capture import MAX_EVENTS, UNKNOWN, Capture, CaptureBuilder, RunFacts
from vkit.core.errors import ConfigError
from vkit.sim.signals import SignalMap
from vkit.video.bus import MAX_WORD_BITS, BusLayout
from vkit.video.formats import pixel_bits
from vkit.video.words import BLANKING_MODES

__all__ = [
    "apply_reset",
    "bit_reader",
    "word_reader",
    "resolve_component",
    "wait_reset_released",
    "ticker",
]

_BIT = {"0": 0, "1": 1, "L": 0, "H": 1, "l": 0, "h": 1}


def bit_reader(handle: Any) -> Callable[[], int]:
    """A function returning the current level of a 1-bit ``handle``: 0, 1, or -1 for X/Z/U/W/-.

    Reads the simulator's bit string directly: about twice as fast per call as ``handle.value``
    (no Logic/LogicArray object is built), which matters in per-clock loops.
    """
    raw = handle._handle.get_signal_val_binstr
    get = _BIT.get

    def read() -> int:
        return get(raw(), -1)

    return read


def word_reader(handle: Any) -> Callable[[], int]:
    """A function returning the unsigned value of ``handle``, or :data:`~vkit.video.capture.UNKNOWN` on any X/Z bit."""
    raw = handle._handle.get_signal_val_binstr

    def read() -> int:
        s = raw()
        try:
            return int(s, 2)
        except ValueError:
            # Weak values resolve as a simulator would; anything else is unknown.
            s = s.upper()
            if set(s) <= {"0", "1", "L", "H"}:
                return int(s.replace("L", "0").replace("H", "1"), 2)
            return UNKNOWN

    return read


def resolve_component(
    dut: Any,
    signals: SignalMap | Mapping[str, str],
    family: str,
    clock: Any,
    reset: Any,
    data_bits: Mapping[str, int] | None = None,
) -> tuple[SignalMap, dict[str, Any], Any, Any]:
    """Resolve a component's signal map; return (map, role -> handle, clock handle, reset handle or None).

    ``clock`` and ``reset`` may be handles, or None to take the map's ``clock`` / ``reset`` roles.
    """
    smap = SignalMap.coerce(signals, family)
    handles = smap.resolve(dut, data_bits)
    clk = clock if clock is not None else handles.get("clock")
    if clk is None:
        raise ConfigError("no clock given and the signal map has no 'clock' role; map 'clock' to the DUT's clock port")
    rst = reset if reset is not None else handles.get("reset")
    return smap, handles, clk, rst


async def wait_reset_released(clock: Any, reset: Any, active_high: bool = True) -> None:
    """Wait on rising clock edges until ``reset`` (if any) is inactive."""
    if reset is None:
        return
    active = 1 if active_high else 0
    read = bit_reader(reset)
    while read() == active:
        await RisingEdge(clock)


async def apply_reset(clock: Any, reset: Any, cycles: int = 4, active_high: bool = True) -> None:
    """Drive ``reset`` active for ``cycles`` rising edges, then inactive; returns right after the release edge.

    Args:
        clock: the clock handle (must already toggle).
        reset: the reset handle, or None (then only ``cycles`` edges pass).
        cycles: rising edges with reset active, >= 1.
        active_high: True for an active-high reset.
    """
    if cycles < 1:
        raise ConfigError(f"reset_cycles = {cycles}, need >= 1 rising edge with reset active")
    if reset is not None:
        reset.value = 1 if active_high else 0
    await ClockCycles(clock, cycles)
    if reset is not None:
        reset.value = 0 if active_high else 1


class _Ticker:
    """One coroutine per clock that calls every registered step function on each rising edge.

    Waking one coroutine per edge and calling plain functions costs about half of what one coroutine per
    component costs (the per-edge wake-up dominates a lean Python loop).
    """

    def __init__(self, clock: Any) -> None:
        self._clock = clock
        self._steps: list[Callable[[], None]] = []
        self._snapshot: tuple[Callable[[], None], ...] = ()
        self._task: Any = None

    def add(self, step: Callable[[], None]) -> None:
        """Call ``step()`` on every rising edge from the next one on."""
        self._steps.append(step)
        self._snapshot = tuple(self._steps)
        if self._task is None or self._task.done():
            self._task = cocotb.start_soon(self._run())

    def remove(self, step: Callable[[], None]) -> None:
        """Stop calling ``step`` (no error when it is not registered)."""
        if step in self._steps:
            self._steps.remove(step)
            self._snapshot = tuple(self._steps)

    async def _run(self) -> None:
        edge = RisingEdge(self._clock)
        while self._snapshot:
            await edge
            for step in self._snapshot:
                step()


_TICKERS: dict[int, tuple[Any, _Ticker]] = {}


def ticker(clock: Any) -> _Ticker:
    """The shared per-edge caller of ``clock`` (one per clock handle)."""
    entry = _TICKERS.get(id(clock))
    if entry is None or entry[0] is not clock:
        entry = (clock, _Ticker(clock))
        _TICKERS[id(clock)] = entry
    return entry[1]


class _Component:
    """What every source, sink and monitor shares: the resolved signal map, clock, reset and reset polarity.

    Subclasses set :attr:`family` ("video" or "stream") and keep the public constructor shape
    ``Component(dut, signals, clock=None, reset=None, **options)``.
    """

    family = ""

    def __init__(
        self,
        dut: Any,
        signals: SignalMap | Mapping[str, str],
        clock: Any,
        reset: Any,
        *,
        data_bits: Mapping[str, int] | None = None,
        reset_active_high: bool = True,
    ) -> None:
        self.signals, self._h, self._clock, self._reset = resolve_component(
            dut, signals, self.family, clock, reset, data_bits
        )
        self.reset_active_high = reset_active_high

    async def _reset_released(self) -> None:
        """Wait on rising clock edges until the reset (if any) is inactive."""
        await wait_reset_released(self._clock, self._reset, self.reset_active_high)


def _in_data_bits(pixel_format: str | None, bus: BusLayout | None = None) -> dict[str, int] | None:
    """The ``data_bits`` a source resolves its map with: ``in_data`` of the bus word's width, or None to infer."""
    if bus is not None:
        return {"in_data": bus.word_bits}
    return {"in_data": pixel_bits(pixel_format)} if pixel_format else None


class _Source(_Component):
    """A component that drives frames into ``in_data``: pixel format, garbage seed, run facts in ``stats``.

    A subclass resolves its map with ``data_bits=_in_data_bits(pixel_format)`` and then calls
    :meth:`_init_source`.
    """

    def _init_source(self, pixel_format: str | None, seed: int, stats: RunFacts | None,
                     blanking: str = "random", blanking_value: int = 0, bus: BusLayout | None = None) -> None:
        if blanking not in BLANKING_MODES:
            raise ConfigError(f"blanking = {blanking!r}; use 'random' or 'constant'")
        if bus is not None and pixel_format is not None and bus.pixel_format != pixel_format:
            raise ConfigError(f"source: pixel_format {pixel_format!r} and bus {bus.pixel_format!r} disagree; give one of them")
        self.bus = bus
        """The word layout (component order, pixels a clock); None: one pixel a clock of the frames' format."""
        self.pixel_format = pixel_format if bus is None else bus.pixel_format
        self.seed = int(seed)
        self.blanking = blanking
        self.blanking_value = int(blanking_value)
        self.stats: RunFacts = stats if stats is not None else RunFacts()
        self.clocks = 0
        """Rising edges seen by the last ``send`` so far."""

    def _layout(self, fmt: str) -> BusLayout:
        """The word layout of frames of format ``fmt``: the one given, or one pixel a clock."""
        return self.bus if self.bus is not None else BusLayout(fmt)

    def _check_data_width(self, fmt: str) -> None:
        """Raise ConfigError when the ``in_data`` port is narrower than the bus word of ``fmt`` needs."""
        width = len(self._h["in_data"])
        need = self._layout(fmt).word_bits
        if width < need:
            raise ConfigError(
                f"role 'in_data' -> port {self.signals.roles['in_data']!r} is {width} bits wide but the pixel "
                f"format {fmt} needs {need} bits; widen the port or send gray8 frames"
            )


class _FrameMonitor(_Component):
    """The monitor behaviour both families share; subclasses say how a line and a frame end.

    Shared: the capture builder and its run facts (``xz_data_count``, ``xz_control``, ``first_output_clock``,
    ``clocks_run``, ``timed_out``, ``latency_clocks``), bounded event lists, frame counting against
    ``expected_height``, :meth:`start` / :meth:`stop` / :meth:`capture` / :meth:`wait_clocks` /
    :meth:`wait_frames`. A subclass implements :meth:`_make_step`, the function the clock's shared
    :func:`ticker` calls on every rising edge; that function ends each clock by advancing
    :attr:`clocks` and setting ``_event`` when it reaches ``_deadline`` and ``_clock_event`` when it
    reaches ``_clock_deadline`` (inline in each step rather than a shared call, since it runs every clock).
    """

    _EVENT_KEYS: tuple[str, ...] = ("xz_control",)
    """:class:`RunFacts` fields of the event lists bounded by :data:`MAX_EVENTS`."""

    @property
    def data_bits(self) -> int:
        """Width of the ``out_data`` port, bits (a word of several pixels when the bus carries lanes)."""
        return len(self._h["out_data"])

    @property
    def splits_lanes(self) -> bool:
        """True when the capture holds one sample a pixel already: an output word over
        :data:`~vkit.video.bus.MAX_WORD_BITS` bits is split into its lanes as it is sampled (no sample holds it)."""
        return self.bus is not None and self.bus.lanes > 1 and self.data_bits > MAX_WORD_BITS

    def _adder(self) -> Callable[[int, int], None]:
        """What records a sampled word: the builder's ``add``, or one that adds each lane as a pixel (:attr:`splits_lanes`)."""
        add = self._builder.add
        if not self.splits_lanes:
            if self.data_bits > MAX_WORD_BITS:
                raise ConfigError(f"monitor: out_data is {self.data_bits} bits, wider than the {MAX_WORD_BITS} bits one "
                                  "sample holds; give the monitor the bus layout (bus=BusLayout(..., lanes=N))")
            return add
        assert self.bus is not None
        field = self.data_bits // self.bus.lanes
        shifts = [self.bus.lane_shift(k, field) for k in range(self.bus.lanes)]
        mask = (1 << field) - 1

        def add_lanes(value: int, clock: int) -> None:
            for shift in shifts:
                add(UNKNOWN if value == UNKNOWN else (value >> shift) & mask, clock)

        return add_lanes

    def _init_monitor(
        self, expected_height: int | None, expected_width: int | None, facts: RunFacts | None, **family_keys: Any
    ) -> None:
        """Set up the frame counting and the capture's run facts; ``family_keys`` are the family's own
        :class:`RunFacts` fields and their starting values. A subclass calls it right after the base constructor
        (and after setting :attr:`bus`)."""
        self.expected_height = expected_height
        self.expected_width = expected_width
        self.clocks = 0
        """Rising edges watched so far."""
        self.frames_complete = 0
        """Output frames finished: ``expected_height`` lines seen, or closed by the start of the next frame."""
        self._split_by_height = False
        """True when a frame ends after ``expected_height`` lines because nothing else marks its end."""
        self._builder = CaptureBuilder(facts)
        self.facts: RunFacts = self._builder.facts
        """The run facts of the capture (sources write theirs here too, through their ``stats``)."""
        f = self.facts
        if f.family is None:
            f.family = self.family
        f.update(dict(xz_data_count=0, xz_control=[], **family_keys, first_output_clock=None, clocks_run=0,
                      timed_out=False))
        self._event_counts = dict.fromkeys(self._EVENT_KEYS, 0)
        self._lines_in_frame = 0
        self._frame_counted = False
        self._target: int | None = None
        self._deadline: int | None = None
        self._event = Event()
        self._clock_deadline: int | None = None
        self._clock_event = Event()
        self._task: Any = None
        self._step: Callable[[], None] | None = None

    # -- public ---------------------------------------------------------------------------------------

    def start(self) -> None:
        """Start watching (idempotent)."""
        if self._task is None:
            self._task = cocotb.start_soon(self._run())

    def stop(self) -> None:
        """Stop watching; the capture keeps what was seen."""
        if self._task is not None and not self._task.done():
            self._task.cancel()
        if self._step is not None:
            ticker(self._clock).remove(self._step)

    def spill_lines_to(self, path: str | Path) -> None:
        """Append every finished output line to ``path`` as it completes (see
        :meth:`vkit.video.capture.CaptureBuilder.spill_to`): what survives a killed simulator."""
        self._builder.spill_to(path)

    def capture(self) -> Capture:
        """A :class:`~vkit.video.capture.Capture` of everything seen so far (partial while running)."""
        f = self.facts
        f.clocks_run = self.clocks
        for key, total in self._event_counts.items():
            if total > MAX_EVENTS:
                note = f"{key}: {total} events, only the first {MAX_EVENTS} are listed"
                if note not in f.notes:
                    f.notes = [s for s in f.notes if not s.startswith(f"{key}: ")] + [note]
        if f.first_output_clock is not None and f.first_input_clock is not None:
            f.latency_clocks = int(f.first_output_clock) - int(f.first_input_clock)
        return self._builder.build()

    async def wait_clocks(self, n: int) -> None:
        """Wait ``n`` (>= 1) clocks as counted by the running monitor (cheaper than a separate edge loop)."""
        self.start()
        self._clock_deadline = self.clocks + max(1, int(n))
        self._clock_event.clear()
        await self._clock_event.wait()
        self._clock_deadline = None

    async def wait_frames(self, n: int, timeout_clocks: int) -> bool:
        """Wait until ``n`` output frames are complete or ``timeout_clocks`` clocks pass; never hangs.

        Returns:
            True when the frames arrived; False on timeout (then ``facts.timed_out`` is True and
            ``timeout_clocks`` is recorded).
        """
        self.start()
        if self.frames_complete >= n:
            return True
        self._target = n
        self._deadline = self.clocks + int(timeout_clocks)
        self._event.clear()
        await self._event.wait()
        self._target = None
        self._deadline = None
        if self.frames_complete >= n:
            return True
        self.facts.timed_out = True
        self.facts.timeout_clocks = int(timeout_clocks)
        self.facts.notes.append(
            f"timed out after {timeout_clocks} clocks with {self.frames_complete} of {n} output frames complete"
        )
        return False

    # -- for subclasses -------------------------------------------------------------------------------

    def _make_step(self) -> Callable[[], None]:
        """The per-edge sampling function (see the class docstring)."""
        raise NotImplementedError

    def _event_at(self, key: str, clock: int, role: str | None = None) -> None:
        """Count an event of list ``key`` at ``clock``; list it as ``[clock, role]`` (or ``clock``) while bounded."""
        self._event_counts[key] += 1
        if self._event_counts[key] <= MAX_EVENTS:
            getattr(self.facts, key).append([clock, role] if role is not None else clock)

    def _check_done(self) -> None:
        if self._target is not None and self.frames_complete >= self._target:
            self._event.set()

    def _count_line(self) -> None:
        """A line with pixels ended: count it, and finish the frame after ``expected_height`` lines."""
        self._lines_in_frame += 1
        if self.expected_height and self._lines_in_frame == self.expected_height and not self._frame_counted:
            self.frames_complete += 1
            self._frame_counted = True
            if self._split_by_height:
                self._builder.new_frame()
                self._lines_in_frame = 0
                self._frame_counted = False
            self._check_done()

    def _close_frame(self) -> None:
        """The next frame starts: count the current one unless it was already complete, and open a new one."""
        if not self._frame_counted:
            self.frames_complete += 1
        self._builder.new_frame()
        self._lines_in_frame = 0
        self._frame_counted = False
        self._check_done()

    async def _run(self) -> None:
        await self._reset_released()
        self._step = self._make_step()
        ticker(self._clock).add(self._step)
