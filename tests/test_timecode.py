import pytest

from framestyle.timecode import frame_to_timecode


def _fields(label: str) -> tuple[int, int, int, int]:
    hh, mm, ss, ff = label.replace(";", ":").split(":")
    return int(hh), int(mm), int(ss), int(ff)


@pytest.mark.parametrize(
    "frame, fps, expected",
    [
        # Worked drop-frame values, SMPTE ST 12-1 (29.97: 2 numbers dropped per minute).
        (1799, 29.97, "00:00:59;29"),
        (1800, 29.97, "00:01:00;02"),
        (17982, 29.97, "00:10:00;00"),
        # 59.94 drops 4 numbers per minute, SMPTE ST 12-1.
        (3600, 59.94, "00:01:00;04"),
        # Non-drop 25 fps: 90000 frames = one hour exactly, SMPTE ST 12-1.
        (90000, 25, "01:00:00:00"),
    ],
)
def test_smpte_reference_values(frame, fps, expected):
    assert frame_to_timecode(frame, fps) == expected


def test_exact_ntsc_rates_are_recognised_as_drop_frame():
    # 30000/1001 and 60000/1001 are the exact NTSC rates (SMPTE ST 12-1).
    assert frame_to_timecode(1800, 30000 / 1001) == "00:01:00;02"
    assert frame_to_timecode(3600, 60000 / 1001) == "00:01:00;04"


def test_drop_frame_hour_matches_the_wall_clock_hour():
    # One real hour at 30000/1001 fps is 107892 frames and drop-frame labels it exactly
    # 01:00:00;00 (SMPTE ST 12-1: 108 numbers dropped per hour); at 60000/1001 it is
    # 215784 frames.
    assert frame_to_timecode(107892, 29.97) == "01:00:00;00"
    assert frame_to_timecode(215784, 59.94) == "01:00:00;00"


def test_23_976_counts_non_drop_at_nominal_24():
    # 23.976 has no drop-frame mode; it counts at nominal 24 (SMPTE ST 12-1).
    assert frame_to_timecode(24, 24000 / 1001) == "00:00:01:00"
    assert frame_to_timecode(86400, 23.976) == "01:00:00:00"


def test_integer_rates_count_non_drop():
    assert frame_to_timecode(0, 24) == "00:00:00:00"
    assert frame_to_timecode(1799, 30) == "00:00:59:29"
    assert frame_to_timecode(1800, 30) == "00:01:00:00"
    assert frame_to_timecode(59, 50) == "00:00:01:09"
    assert frame_to_timecode(60 * 3600 + 61, 60) == "01:00:01:01"


def test_hours_wrap_at_24_like_the_time_of_day_counter():
    # SMPTE ST 12-1: the hours field runs 00-23.
    assert frame_to_timecode(24 * 3600 * 24, 24) == "00:00:00:00"
    assert frame_to_timecode(25 * 3600 * 24 + 5, 24) == "01:00:00:05"


@pytest.mark.parametrize("fps, drop", [(29.97, 2), (59.94, 4)])
def test_drop_frame_labels_increase_by_one_and_skip_only_the_dropped_numbers(fps, drop):
    # Over 12 minutes (crosses a tenth minute), each next label is the previous label
    # plus one frame number, except at a minute start that is not a multiple of ten,
    # where numbers 00..drop-1 are skipped (SMPTE ST 12-1; rule stated as common practice
    # in editing manuals).
    nominal = round(fps)
    previous = _fields(frame_to_timecode(0, fps))
    assert previous == (0, 0, 0, 0)
    for frame in range(1, int(12 * 60 * fps) + 10):
        label = frame_to_timecode(frame, fps)
        assert ";" in label
        hh, mm, ss, ff = current = _fields(label)
        assert current > previous  # strictly increasing
        if ss == 0 and mm % 10 != 0:
            assert ff >= drop, label
        p_hh, p_mm, p_ss, p_ff = previous
        expected_ff, carry = (p_ff + 1) % nominal, (p_ff + 1) // nominal
        if carry:
            expected_ss = (p_ss + 1) % 60
            expected_mm = p_mm + (p_ss + 1) // 60
            if expected_ss == 0 and expected_mm % 10 != 0:
                expected_ff = drop
            assert (hh, mm, ss, ff) == (p_hh, expected_mm, expected_ss, expected_ff)
        else:
            assert (hh, mm, ss, ff) == (p_hh, p_mm, p_ss, expected_ff)
        previous = current


@pytest.mark.parametrize("frame, fps", [(-1, 25), (0, 0), (0, -29.97), (0, float("nan")), (1.5, 25)])
def test_invalid_frame_or_rate_raises_value_error(frame, fps):
    with pytest.raises(ValueError):
        frame_to_timecode(frame, fps)
