"""TraceFlags: streamed blocks, severity per frame, per-pixel binning, divergence jumps.

The oracles here are written independently of the module: binning is checked against a
brute-force loop that assigns each frame to the pixel ``floor(f * pixels / n)``, and severities
against core.check.SEVERITY by name.
"""
from __future__ import annotations

import numpy as np
import pytest

from resweep.app.viewer.flags import TraceFlags, bin_worst, severity_of
from resweep.core.check.kinds import KINDS, SEVERITY, SEVERITY_RANK
from resweep.core.check.stream import BlockResult
from resweep.core.check.rows import RowResults

BIT = {k: 1 << i for i, k in enumerate(KINDS)}


def brute_bins(values, pixels):
    n = len(values)
    out = [None] * pixels
    for f, v in enumerate(values):
        i = f * pixels // n
        out[i] = v if out[i] is None else max(out[i], v)
    return out


@pytest.mark.parametrize("n,pixels", [(1_000_003, 613), (240, 240), (240, 7), (17, 16), (5, 1)])
def test_binning_keeps_the_worst_and_loses_no_frame(n, pixels):
    rng = np.random.default_rng(n)
    values = np.zeros(n, np.int8)
    # Sparse marks: single error frames among a million must still show.
    for sev in (1, 2, 3):
        values[rng.choice(n, size=min(n, 3), replace=False)] = sev
    got = bin_worst(values, pixels)
    if n > 10_000:  # brute force on the marked frames only; the rest are zeros
        want = np.zeros(pixels, np.int8)
        for f in np.flatnonzero(values):
            want[f * pixels // n] = max(want[f * pixels // n], values[f])
        assert (got == want).all()
    else:
        assert got.tolist() == brute_bins(values.tolist(), pixels)
    assert got.max() == values.max()
    assert np.count_nonzero(got == 3) >= 1


def test_more_pixels_than_frames_repeats_each_frame():
    values = np.array([0, 3, 0, 2], np.int8)
    got = bin_worst(values, 10)
    assert got.tolist() == [values[i * 4 // 10] for i in range(10)]


def test_severity_of_follows_the_core_table():
    for kind in KINDS:
        assert severity_of(np.array([BIT[kind]]))[0] == SEVERITY_RANK[SEVERITY[kind]]
    both = BIT["discontinuity"] | BIT["tunneling"]  # info + error -> error
    assert severity_of(np.array([both, 0]))[0] == 3
    assert severity_of(np.array([0]))[0] == 0


def block(frames, cols, flags, passes=1):
    rows = RowResults.empty(len(frames), passes, np.float64)
    rows.flags[:] = flags
    return BlockResult(np.asarray(frames), np.asarray(cols), rows)


@pytest.fixture
def tf():
    t = TraceFlags(50, 3)
    frames = np.repeat(np.arange(50), 3)
    cols = np.tile(np.arange(3), 50)
    flags = np.zeros(150, np.int32)
    def put(f, c, kind):
        flags[f * 3 + c] |= BIT[kind]
    put(5, 0, "snag")
    put(12, 2, "tunneling")
    put(12, 1, "discontinuity")
    put(30, 1, "penetration")
    put(41, 0, "tunneling")
    t.add_block(block(frames[:75], cols[:75], flags[:75]))
    return t, frames, cols, flags


def test_blocks_fill_in_and_unsolved_frames_show_as_unknown(tf):
    t, frames, cols, flags = tf
    assert t.solved[:25].all() and not t.solved[25:].any()
    sev = t.frame_severity()
    assert sev[5] == 2 and sev[12] == 3 and (sev[25:] == -1).all()
    v0 = t.version
    t.add_block(block(frames[75:], cols[75:], flags[75:]))
    assert t.version > v0 and t.complete
    assert t.frame_severity()[30] == 3


def test_severity_over_selected_entities_and_kind(tf):
    t, frames, cols, flags = tf
    t.add_block(block(frames[75:], cols[75:], flags[75:]))
    sev = t.frame_severity(columns=[1])
    assert sev[12] == 1 and sev[30] == 3 and sev[5] == 0
    assert t.frame_severity(columns=[0], kind="tunneling")[[5, 41]].tolist() == [0, 3]
    strip = t.strip(5, columns=[0, 2])  # 10 frames per pixel
    assert strip.tolist() == [2, 3, 0, 0, 3]


def test_next_and_previous_divergence_optionally_of_one_kind(tf):
    t, frames, cols, flags = tf
    t.add_block(block(frames[75:], cols[75:], flags[75:]))
    assert t.next_divergence(0) == 5
    assert t.next_divergence(5) == 12
    assert t.next_divergence(12, kind="tunneling") == 41
    assert t.next_divergence(41) is None
    assert t.previous_divergence(41) == 30
    assert t.previous_divergence(41, columns=[2]) == 12
    assert t.previous_divergence(5) is None
    assert t.next_divergence(0, columns=[1], kind="penetration") == 30


def test_counts_and_reset(tf):
    t, frames, cols, flags = tf
    t.add_block(block(frames[75:], cols[75:], flags[75:]))
    assert t.counts(0)["tunneling"] == 1 and t.counts(0)["snag"] == 1
    assert t.diverging_columns().tolist() == [True, True, True]
    t.reset()
    assert not t.solved.any() and t.next_divergence(0) is None
