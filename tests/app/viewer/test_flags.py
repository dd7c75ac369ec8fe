"""TraceFlags: streamed blocks, severity per frame, per-pixel binning, divergence jumps, and the
summaries and strip pixels kept up to date block by block.

The oracles here are written independently of the module: binning is checked against a
brute-force loop that assigns each frame to the pixel ``floor(f * pixels / n)``, and severities
against core.check.SEVERITY by name.
"""
from __future__ import annotations

import numpy as np
import pytest

from resweep.app.viewer.flags import TraceFlags, bin_pixels, bin_worst, pixels_of_frames, severity_of
from resweep.app.viewer.strip_model import StripBins
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


# -- incremental summaries: every summary kept block by block equals the one computed afresh from
# the whole (F, N) array (brute force below, written from the definitions in the docstrings).

def brute_severity(flags, solved, columns, kind_bits):
    sev = []
    for f in range(flags.shape[0]):
        if not solved[f]:
            sev.append(-1)
            continue
        bits = 0
        for c in columns:
            bits |= int(flags[f, c]) & kind_bits
        sev.append(max([SEVERITY_RANK[SEVERITY[k]] for k in KINDS if bits & BIT[k]], default=0))
    return sev


def random_blocks(F, N, rng, density=0.05):
    """Blocks of whole frames in order, ragged sizes, some rows inactive (absent)."""
    f = 0
    while f < F:
        g = min(F, f + int(rng.integers(1, 9)))
        fr, col = np.nonzero(rng.random((g - f, N)) < 0.8)
        kinds = rng.integers(0, len(KINDS), len(fr))
        fl = np.where(rng.random(len(fr)) < density, 1 << kinds, 0).astype(np.int32)
        fl[rng.random(len(fr)) < density / 3] |= BIT["discontinuity"]
        yield fr + f, col, fl, g
        f = g


def test_streamed_summaries_equal_a_fresh_computation():
    rng = np.random.default_rng(7)
    F, N = 97, 6
    t = TraceFlags(F, N)
    want = np.zeros((F, N), np.int32)
    sel = (1, 4)
    t.frame_severity(columns=sel)  # a subset summary made early is kept up to date too
    for fr, col, fl, g in random_blocks(F, N, rng):
        t.add_block(block(fr, col, fl))
        t.mark_solved(np.arange(g))
        want[fr, col] = fl
        solved = np.arange(F) < g
        for columns in (None, sel, (2,)):
            cols = range(N) if columns is None else columns
            for kind in (None, "tunneling", "discontinuity"):
                bits = int(np.bitwise_or.reduce(list(BIT.values()))) if kind is None else BIT[kind]
                assert t.frame_severity(columns, kind).tolist() == brute_severity(want, solved, cols, bits)
        for c in range(N):
            assert t.counts(c) == {k: int(np.count_nonzero(want[:, c] & BIT[k])) for k in KINDS}
        assert t.diverging_count == int(np.count_nonzero(want))
        assert t.solved_count == g and t.complete == (g == F)
        assert t.diverging_columns().tolist() == (want != 0).any(axis=0).tolist()


def test_overwriting_rows_keeps_counts_exact():
    t = TraceFlags(4, 2)
    t.add_block(block([0, 1, 2], [0, 0, 1], np.array([BIT["snag"], BIT["snag"], BIT["penetration"]], np.int32)))
    t.set_frame(1, np.array([BIT["tunneling"], BIT["snag"]], np.int32), np.array([True, False]))
    assert t.counts(0)["snag"] == 1 and t.counts(0)["tunneling"] == 1 and t.counts(1)["snag"] == 0
    assert t.diverging_count == 3
    assert t.next_divergence(0, kind="tunneling") == 1


@pytest.mark.parametrize("n,pixels", [(1000, 37), (240, 240), (17, 50), (5, 3), (1, 9)])
def test_pixels_of_frames_are_exactly_the_pixels_showing_them(n, pixels):
    # brute force: which pixels does each frame show in (bin_worst's binning rule)
    shows = [set() for _ in range(n)]
    for i in range(pixels):
        if pixels >= n:
            shows[i * n // pixels].add(i)
    if pixels < n:
        for f in range(n):
            shows[f].add(f * pixels // n)
    for lo, hi in [(0, n), (0, 1), (n - 1, n), (n // 3, n // 2 + 1)]:
        if hi <= lo:
            continue
        want = set().union(*shows[lo:hi])
        i0, i1 = pixels_of_frames(lo, hi, n, pixels)
        assert want == set(range(i0, i1))


def test_partial_strip_equals_the_same_pixels_of_the_whole_strip():
    rng = np.random.default_rng(3)
    values = rng.integers(-1, 4, 1013).astype(np.int8)
    for pixels in (7, 300, 1013, 2500):
        whole = bin_worst(values, pixels)
        for i0, i1 in [(0, pixels), (1, 2), (pixels // 3, pixels // 2 + 1), (pixels - 1, pixels)]:
            part = bin_pixels(lambda a, b: values[a:b], len(values), pixels, i0, i1)
            assert part.tolist() == whole[i0:i1].tolist()


def test_strip_bins_follow_the_stream_touching_only_the_changed_pixels():
    rng = np.random.default_rng(11)
    F, N, P = 500, 4, 64
    t = TraceFlags(F, N)
    bins = StripBins(t)
    bins.layout(P, 100, 400, columns=(0, 2), kind=None)
    bins.refresh()
    for fr, col, fl, g in random_blocks(F, N, rng, density=0.2):
        t.add_block(block(fr, col, fl))
        before = bins.values.copy()
        moved = bins.refresh()
        fresh = t.strip(P, 100, 400, columns=(0, 2))
        assert bins.values.tolist() == fresh.tolist()
        changed = np.flatnonzero(before != fresh)
        if len(changed):  # every changed pixel lies in the range reported
            assert moved is not None and moved[0] <= changed[0] and changed[-1] < moved[1]
        if fr.max() < 100 or fr.min() >= 400:  # outside the visible frames: nothing to redo
            assert moved is None
    assert bins.layout(P, 0, F) and bins.refresh() == (0, P)
    assert bins.values.tolist() == t.strip(P).tolist()
