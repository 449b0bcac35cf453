import pytest

from framestyle.timecode import ClipTimecode, frame_to_timecode, timecode_to_frame


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


# ----- labels back to frames, and a clip's start timecode ---------------------------------


@pytest.mark.parametrize(
    "label, fps, frame",
    [
        # Worked drop-frame values, SMPTE ST 12-1: the label after 00:00:59;29 is 00:01:00;02.
        ("00:00:59;29", 29.97, 1799),
        ("00:01:00;02", 29.97, 1800),
        ("00:10:00;00", 29.97, 17982),  # minute 10 keeps its 00 and 01
        ("01:00:00;00", 29.97, 107892),  # one wall-clock hour
        ("00:01:00;04", 59.94, 3600),
        ("01:00:00:00", 25, 90000),
        ("01:00:00:00", 23.976, 86400),  # nominal 24, non-drop
        ("00:01:00:00", 29.97, 1800),  # 29.97 non-drop counts at nominal 30
    ],
)
def test_labels_read_back_to_the_frames_smpte_gives_them(label, fps, frame):
    assert timecode_to_frame(label, fps) == frame


@pytest.mark.parametrize("fps", [23.976, 24, 25, 29.97, 30, 50, 59.94])
def test_labels_and_frames_round_trip(fps):
    for frame in [*range(0, 20000, 7), 107891, 107892, 107893, 24 * 3600 * 24 - 1]:
        assert timecode_to_frame(frame_to_timecode(frame, fps), fps) == frame


@pytest.mark.parametrize("fps", [24000 / 1001, 25, 30000 / 1001, 60000 / 1001])
def test_labels_match_opentimelineio_at_every_minute_boundary(fps):
    # Reference library: OpenTimelineIO's opentime (drop-frame inferred from the rate, as here).
    from opentimelineio import opentime

    for minute in range(0, 70):
        for frame in (round(minute * 60 * fps) + k for k in (-1, 0, 1, 2, 3)):
            if frame >= 0:
                assert frame_to_timecode(frame, fps) == opentime.to_timecode(opentime.RationalTime(frame, fps), fps)


@pytest.mark.parametrize(
    "label, fps, words",
    [
        ("00:01:00;00", 29.97, "skipped"),  # SMPTE ST 12-1: 00 and 01 do not exist at minute 1
        ("00:01:00;03", 59.94, "skipped"),
        ("00:00:00;00", 25, "drop-frame timecode exists only at 29.97 and 59.94"),
        ("00:00:00:25", 25, "frames run 00-24"),
        ("24:00:00:00", 25, r"not a timecode at 25 frames/s \(hours run 00-23\)"),  # a sweep: it blamed the frames
        ("00:60:00:00", 25, r"\(minutes run 00-59\)"),
        ("00:00:60:30", 25, r"\(seconds run 00-59, frames run 00-24\)"),
        ("1:00:00:00", 25, "not a timecode like"),
        ("01:00:00", 25, "not a timecode like"),
    ],
)
def test_impossible_labels_raise_value_error(label, fps, words):
    with pytest.raises(ValueError, match=words):
        timecode_to_frame(label, fps)


def test_drop_frame_can_be_chosen_at_ntsc_rates_only():
    assert frame_to_timecode(1800, 29.97, drop_frame=False) == "00:01:00:00"
    assert frame_to_timecode(1800, 29.97, drop_frame=True) == "00:01:00;02"
    with pytest.raises(ValueError, match="drop-frame"):
        frame_to_timecode(0, 25, drop_frame=True)


def test_a_clip_labels_its_frames_from_its_start_timecode():
    clock = ClipTimecode(25, "10:00:00:00")
    assert (clock.label(0), clock.label(26), clock.first) == ("10:00:00:00", "10:00:01:01", 900000)
    assert clock.position("10:00:01:01") == 26
    assert not clock.drop_frame


def test_a_drop_frame_start_keeps_dropping_across_minutes():
    # 00:00:59;28 + 2 frames = 00:01:00;02 (SMPTE ST 12-1 drop-frame).
    clock = ClipTimecode(29.97, "00:00:59;28")
    assert [clock.label(k) for k in range(4)] == ["00:00:59;28", "00:00:59;29", "00:01:00;02", "00:01:00;03"]
    assert clock.position("00:01:00;02") == 2 and clock.drop_frame


def test_a_non_drop_start_at_29_97_labels_non_drop():
    clock = ClipTimecode(30000 / 1001, "00:00:59:29")
    assert (clock.label(1), clock.drop_frame) == ("00:01:00:00", False)


def test_a_clip_without_start_timecode_counts_from_zero():
    assert ClipTimecode(29.97).label(1800) == "00:01:00;02"
    assert ClipTimecode(24).label(0) == "00:00:00:00"


def test_a_clip_running_past_midnight_wraps_like_the_clock():
    clock = ClipTimecode(24, "23:59:59:23")
    assert clock.label(1) == "00:00:00:00" and clock.position("00:00:00:00") == 1


@pytest.mark.parametrize("fps, start", [(25, "00:00:00;00"), (25, "00:00:00:25"), (0, None), (24, "noon")])
def test_a_bad_clip_timecode_raises_value_error(fps, start):
    with pytest.raises(ValueError):
        ClipTimecode(fps, start)
