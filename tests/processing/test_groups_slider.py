"""Exclusive groups (ties, switching) and the slider / wheel centroid against hand-worked examples."""

import numpy as np

from processing.detections import GroupChange, KeyState, SliderChange
from processing.groups import ExclusiveGroup, GroupSpec, pick_winner
from processing.slider import Slider, SliderSpec, centroid_position

T, R = int(KeyState.TOUCHED), int(KeyState.RELEASED)


def test_pick_winner_rule():
    deltas = [0, 120, 300, 300, 90]
    assert pick_winner(None, [], deltas, 0) is None
    assert pick_winner(None, [1, 2, 3], deltas, 0) == 2  # tie 2 vs 3: listed first wins
    assert pick_winner(3, [1, 2, 3], deltas, 0) == 3  # a tie never takes the place from the winner
    assert pick_winner(1, [1, 2], deltas, 0) == 2  # strictly stronger takes over
    assert pick_winner(1, [1, 2], deltas, 200) == 1  # ... unless within the switch margin
    assert pick_winner(1, [2, 4], deltas, 0) == 2  # the winner released: strongest remaining


def test_group_reports_changes_including_release_to_none():
    g = ExclusiveGroup(GroupSpec("zones", (0, 1, 2)))
    deltas = np.array([[150, 0, 0], [150, 200, 0], [150, 200, 0], [150, 0, 0], [0, 0, 0]])
    states = np.array([[T, R, R], [T, T, R], [T, T, R], [T, R, R], [R, R, R]], np.int8)
    events = g.update(10, np.arange(5) / 100, deltas, states)
    assert events == [GroupChange("zones", 10, 0.0, 0), GroupChange("zones", 11, 0.01, 1),
                      GroupChange("zones", 13, 0.03, 0), GroupChange("zones", 14, 0.04, None)]


def test_centroid_hand_worked_slider():
    # Hand-worked: 4 pads, deltas [0, 50, 100, 50]. Strongest pad 2, neighbours 1 and 3:
    # num = 1*50 + 2*100 + 3*50 = 400, den = 200, centroid 2.0 pads of 0..3.
    # resolution 100: position = 400 * 99 / (200 * 3) = 39600 / 600 = 66.
    assert centroid_position([0, 50, 100, 50], wheel=False, resolution=100) == 66
    # [80, 40, 0, 0]: pad 0 strongest, neighbour 1 only: num = 40, den = 120 -> 40*99/360 = 11 (11.0)
    assert centroid_position([80, 40, 0, 0], wheel=False, resolution=100) == 11
    # negative deltas weigh nothing: [-30, 0, 90, -5] -> num = 180, den = 90: 2.0 -> 66
    assert centroid_position([-30, 0, 90, -5], wheel=False, resolution=100) == 66
    # a tie for the strongest pad goes to the lower one: [50, 100, 100, 0] -> pad 1 with pads 0 and 2:
    # num = 0*50 + 1*100 + 2*100 = 300, den = 250 -> 300*99 / 750 = 39 (39.6). (Pad 2 would give 49.)
    assert centroid_position([50, 100, 100, 0], wheel=False, resolution=100) == 39


def test_centroid_hand_worked_wheel_wraps():
    # 4 pads, resolution 360. [60, 0, 0, 60]: pad 0 strongest (first among equals), neighbours 3 (as -1)
    # and 1: num = -1*60 + 0 + 1*0 = -60, den = 120, m = 480: (-60 mod 480) = 420 -> 420*360/480 = 315.
    assert centroid_position([60, 0, 0, 60], wheel=True, resolution=360) == 315
    # [100, 0, 0, 0]: exactly pad 0 -> 0; [0, 0, 0, 100]: pad 3 -> 3*360/4 = 270
    assert centroid_position([100, 0, 0, 0], wheel=True, resolution=360) == 0
    assert centroid_position([0, 0, 0, 100], wheel=True, resolution=360) == 270
    # [30, 0, 60, 90]: pad 3, neighbours 2 and 4 (= pad 0): num = 2*60 + 3*90 + 4*30 = 510, den = 180
    # m = 720: 510 * 360 / 720 = 255
    assert centroid_position([30, 0, 60, 90], wheel=True, resolution=360) == 255


def test_slider_reports_touch_position_and_release():
    s = Slider(SliderSpec("duration", (2, 3, 4), resolution=101))
    deltas = np.array([[0, 0, 0, 0, 0], [0, 0, 200, 0, 0], [0, 0, 100, 100, 0], [0, 0, 100, 100, 0],
                       [0, 0, 0, 0, 0]])
    states = np.array([[R] * 5, [R, R, T, R, R], [R, R, T, T, R], [R, R, T, T, R], [R] * 5], np.int8)
    events = s.update(0, np.arange(5) / 100, deltas, states)
    # frame 2: pads [100, 100, 0]: pad 0 (first among equals), num = 100, den = 200 -> 100*100/400 = 25
    assert events == [SliderChange("duration", 1, 0.01, 0, True), SliderChange("duration", 2, 0.02, 25, True),
                      SliderChange("duration", 4, 0.04, None, False)]
