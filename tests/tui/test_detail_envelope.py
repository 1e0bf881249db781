"""The detail plot's decimation keeps what a tuning engineer looks for: spikes and the true extremes."""

import numpy as np

from tui.widgets.detail_panel import envelope


def test_a_one_frame_spike_survives_decimation():
    # 8 s at 1 kHz onto 120 points: plain every-Nth-sample thinning would almost surely miss one frame.
    t = np.arange(8000) / 1000.0
    x = np.full(8000, 1000.0)
    x[4321] = 1090.0
    x[6000] = 950.0
    tt, xx = envelope(t, x, 120)
    assert len(xx) <= 120
    assert xx.max() == 1090.0 and xx.min() == 950.0  # numpy's own max/min of the input (the reference)
    assert np.all(np.diff(tt) > 0)  # still in time order, so the line is drawn left to right
    assert 4.321 in tt and 6.0 in tt


def test_short_series_pass_through_unchanged():
    t, x = np.arange(50.0), np.arange(50.0) * 2
    tt, xx = envelope(t, x, 120)
    assert tt is t and xx is x
