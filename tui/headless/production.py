"""`padtune check`'s run over a link: hands off from the first frame, then each key in turn.

The shell around `processing.acceptance` (which decides the verdicts): time, prompts for the operator,
and the front ends' shared `tui.pipeline.Pipeline`, whose feed is the `UnitProbe`.
"""

from __future__ import annotations

from collections.abc import Callable

from processing.acceptance import UnitProbe, touch_figures
from processing.session import Session
from tui.pipeline import Pipeline, Producer, StopSignal

# A board that resets when its port opens (many USB boards do) may take a couple of seconds to send
# its first frame; the hands-off time counts from that frame (common practice, no source).
FIRST_FRAME_WAIT_S = 5.0

Say = Callable[[str], None]


def probe_pipeline(link: Producer, probe: UnitProbe, source: str = "") -> Pipeline:
    """The pipeline of a check: the link's events go to the probe, which feeds its session."""
    return Pipeline(link, probe.session, feed=lambda events, now: probe.feed(events), source=source)


def quiet_phase(pipeline: Pipeline, probe: UnitProbe, duration_s: float, stop: StopSignal,
                on_first_frame: Callable[[], None] | None = None) -> bool:
    """Wait for the first frame, then measure hands off for `duration_s`; False when no frame came."""
    wait_s = max(FIRST_FRAME_WAIT_S, duration_s)
    pipeline.run(until_s=pipeline.clock() + wait_s, stop=stop, done=lambda: probe.quiet_frames > 0)
    if probe.quiet_frames == 0:
        return False
    if on_first_frame is not None:
        on_first_frame()
    pipeline.run(until_s=pipeline.clock() + duration_s, stop=stop)
    return True


def assume_rising(session: Session, say: Say) -> None:
    """A production check does not learn a polarity from touches (its touch step would go to the lesson):
    where neither the profile, the board nor --polarity gives one, it checks with + and says so."""
    unknown = [c for c, sign in enumerate(session.polarity) if sign is None]
    if not unknown:
        return
    names = ", ".join(session.names[c] for c in unknown[:8]) + (", ..." if len(unknown) > 8 else "")
    say(f"padtune: no polarity for {names} (the profile and the board do not say): checking with + "
        "(counts rise on touch); give --polarity, or a profile saved with its polarity")
    for c in unknown:
        session.set_polarity(c, 1)


def touch_phase(pipeline: Pipeline, probe: UnitProbe, names: list[str], timeout_s: float,
                stop: StopSignal, say: Say) -> None:
    """Ask for each key in turn (skipping keys already done) and say what its touch measured."""
    probe.phase = "touch"
    for c, name in enumerate(names):
        if c in probe.done_keys:
            continue
        say(f"touch and hold {name}, then let go")
        pipeline.run(until_s=pipeline.clock() + timeout_s, stop=stop, done=lambda c=c: c in probe.done_keys)
        if c in probe.done_keys:
            signal, snr = touch_figures(probe, c)
            shown = f", SNR {snr:.1f}" if snr is not None else ""
            say(f"  {name}: touch seen, delta {signal:.0f} counts{shown}")
        else:
            say(f"  {name}: no touch seen in {timeout_s:g} s")
        if stop.stopped:
            return
