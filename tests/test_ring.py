"""`FrameRing`: the preallocated ring the audio callback writes and the analysis reads.

Every frame has an absolute index (its place in the count of frames ever written). The oracle
here is the concatenation of everything written (arithmetic): a read of [start, start + n) must
equal that slice of the stream, or be None when those frames are overwritten or not yet written.
Samples are small whole numbers so float32 storage is exact.
"""

from __future__ import annotations

import numpy as np
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from rtanalyzer.sources.ring import FrameRing


def _frames(start: int, n: int, channels: int = 2) -> np.ndarray:
    """Frames whose value is their absolute index (channel c holds index + 1000·c)."""
    idx = np.arange(start, start + n, dtype=np.float64)[:, None]
    return idx + 1000.0 * np.arange(channels)[None, :]


def test_rejects_empty_ring():
    with pytest.raises(ValueError):
        FrameRing(0, 1)
    with pytest.raises(ValueError):
        FrameRing(8, 0)


def test_wraps_around_and_reads_by_absolute_index():
    ring = FrameRing(8, 2)
    ring.write(_frames(0, 5))
    ring.write(_frames(5, 5))  # wraps: positions 5, 6, 7, 0, 1
    assert ring.written == 10
    # arithmetic: the last 8 frames (2..9) are held, the slice is the stream's slice
    np.testing.assert_array_equal(ring.read(2, 8), _frames(2, 8))
    np.testing.assert_array_equal(ring.read(6, 3), _frames(6, 3))  # crosses the physical end
    np.testing.assert_array_equal(ring.read(9, 1), _frames(9, 1))


def test_read_returns_none_when_lapped_unwritten_or_negative():
    ring = FrameRing(8, 1)
    assert ring.read(0, 1) is None  # nothing written yet
    ring.write(_frames(0, 10, 1))
    assert ring.read(1, 3) is None  # frame 1 was overwritten by frame 9
    assert ring.read(8, 3) is None  # frame 10 is not yet written
    assert ring.read(-1, 2) is None  # before the start of the stream
    assert ring.read(2, -1) is None
    assert ring.read(2, 8) is not None  # the oldest frame still held


def test_read_into_a_given_buffer():
    ring = FrameRing(8, 2)
    ring.write(_frames(0, 12))
    out = np.full((4, 2), -1.0, dtype=np.float32)
    got = ring.read(6, 4, out=out)
    assert got is out
    np.testing.assert_array_equal(out, _frames(6, 4))


def test_latest_gives_the_newest_frames_and_the_end_index():
    ring = FrameRing(8, 2)
    ring.write(_frames(0, 3))
    frames, end = ring.latest(2)
    assert end == 3
    np.testing.assert_array_equal(frames, _frames(1, 2))
    assert ring.latest(4)[0] is None  # only 3 frames written
    ring.write(_frames(3, 20))
    frames, end = ring.latest(8)
    assert end == 23
    np.testing.assert_array_equal(frames, _frames(15, 8))
    assert ring.latest(9)[0] is None  # more than the ring holds


def test_block_larger_than_capacity_keeps_the_newest_frames():
    ring = FrameRing(8, 2)
    ring.write(_frames(0, 3))
    ring.write(_frames(3, 21))  # 21 frames into a ring of 8
    assert ring.written == 24  # every frame counts, kept or not
    np.testing.assert_array_equal(ring.read(16, 8), _frames(16, 8))
    assert ring.read(15, 1) is None
    # and the ring keeps working after that
    ring.write(_frames(24, 5))
    np.testing.assert_array_equal(ring.latest(8)[0], _frames(21, 8))


@settings(max_examples=60, deadline=None)
@given(
    capacity=st.integers(1, 40),
    channels=st.integers(1, 2),
    sizes=st.lists(st.integers(0, 100), min_size=1, max_size=25),
    data=st.data(),
)
def test_latest_equals_the_tail_of_the_stream(capacity, channels, sizes, data):
    # Oracle: the concatenation of every block written (arithmetic).
    ring = FrameRing(capacity, channels)
    written = 0
    blocks = []
    for size in sizes:
        block = _frames(written, size, channels)
        blocks.append(block)
        ring.write(block)
        written += size
        assert ring.written == written
        stream = np.concatenate(blocks) if blocks else np.empty((0, channels))
        n = data.draw(st.integers(0, min(written, capacity)), label="n")
        frames, end = ring.latest(n)
        assert end == written
        np.testing.assert_array_equal(frames, stream[written - n :])
        # any readable span by absolute index matches the stream too
        if written:
            start = data.draw(st.integers(max(0, written - capacity), written - 1), label="start")
            count = data.draw(st.integers(0, written - start), label="count")
            np.testing.assert_array_equal(ring.read(start, count), stream[start : start + count])
            assert ring.read(start, written - start + 1) is None  # one frame past the end
        if written > capacity:
            assert ring.read(written - capacity - 1, 1) is None  # one frame too old
