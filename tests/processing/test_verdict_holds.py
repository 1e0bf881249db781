"""Issue 12: the SNR verdict of a key nobody touches holds still while the other keys are pressed in turn.

On the demo board (the simulated greenhouse panel, decoded by the real decoder into a live Session): every
key is pressed once so each has a touch signal, then the keys are pressed in turn again while the verdicts
(and noise) of all the others are read every 0.1 s. A neighbour's touch (the slider's pads share a finger)
moves a released key; counted as its noise it would swing its verdict. Reference: the verdict rule itself
(VerdictBounds) applied to the noise and signal read before the second round: they must not change.
"""


from processing.measure import VerdictBounds
from processing.session import Session
from tests.tui.feeds import SimFeed


def _drive(any_key: bool, held: bool = True
           ) -> tuple[list[str], list[dict[int, list[str]]], list[dict[int, list[tuple]]]]:
    """Round one presses every key once; round two presses them in turn and, from the frame the pressed
    key is detected until 0.3 s after it is lifted, reads every other key's verdict every 0.1 s, and its
    noise while the pressed key is detected (one dict per press: key -> readings in order)."""
    feed = SimFeed("greenhouse", seed=7, script=False, step_s=0.05)
    session = Session()
    feed.advance(3.0)
    session.handle(feed.drain())
    m = session.measures
    assert m is not None
    m._gate.any_key = any_key  # the rule under test (False: each key judged by its own state alone)
    if not held:  # the verdict as the SNR alone gives it, without the hysteresis (VerdictBounds.held)
        m.bounds = VerdictBounds(margin=0.0, hold_s=0.0)
    names = list(session.names)
    verdicts: list[dict[int, list[str]]] = []
    noise: list[dict[int, list[tuple]]] = []

    def run(seconds: float, watch: int | None = None, until_lift: bool = False) -> None:
        for _ in range(round(seconds / 0.1)):
            feed.advance(0.1)
            session.handle(feed.drain())
            detected = m.history.last(1)[3][0, watch] != 0 if watch is not None else False
            if watch is None or not (detected or until_lift):
                continue
            for c, q in enumerate(m.qualities()):
                if c != watch:
                    verdicts[-1].setdefault(c, []).append(q.verdict)
                    if detected:  # the noise window is frozen while the pressed key is down
                        figures = (q.noise.pp_counts, q.noise.rms_counts) if q.noise else None
                        noise[-1].setdefault(c, []).append(figures)

    for name in names:  # round one: every key gets a touch signal
        feed.board.press(name)
        run(1.0)
        feed.board.press(name, False)
        run(2.5)
    for c, name in enumerate(names):  # round two: pressed in turn, the others watched
        verdicts.append({})
        noise.append({})
        feed.board.press(name)
        run(1.0, c)
        feed.board.press(name, False)
        run(0.3, c, until_lift=True)  # inside the settle guard after the lift: the others still hold
        run(2.2)
    return names, verdicts, noise


def test_untouched_keys_verdicts_and_noise_hold_still_while_others_are_pressed():
    names, verdicts, noise = _drive(any_key=True)
    for press, (seen_v, seen_n) in enumerate(zip(verdicts, noise, strict=True)):
        assert len(seen_v) == len(names) - 1, names[press]
        for c, readings in seen_v.items():
            # the same verdict through the whole press, and a real one
            assert len(set(readings)) == 1 and readings[0] != "unmeasured", (names[press], names[c], readings)
        for c, readings in seen_n.items():
            # the noise window stops: after the frames decided late (one settle guard, 0.1 s, the first
            # reading) the figures do not move at all while the pressed key is down
            assert len(set(readings[1:])) == 1, (names[press], names[c], readings)


def test_the_old_rule_let_a_neighbours_touch_into_the_noise_and_verdicts_flipped():
    # The test above can fail: judged by its own state alone, a released key's noise window keeps moving
    # while a neighbour is held and takes in its crosstalk (the slider's pads share a finger); on this
    # board and seed the untouched keys' verdicts then flip between marginal and solid (12 times when
    # this was written, 0 with the rule of issue 12). The verdict's hysteresis is off here: it would hide
    # some of those flips, and the rule is about the noise.
    _, verdicts_old, noise_old = _drive(any_key=False, held=False)
    _, _, noise_new = _drive(any_key=True)

    def worst(per_press: list[dict[int, list[tuple]]]) -> float:
        return max(pp for press in per_press for readings in press.values() for pp, _ in readings)

    flips = [c for press in verdicts_old for c, readings in press.items() if len(set(readings)) > 1]
    assert len(flips) >= 3 and worst(noise_old) > worst(noise_new)
