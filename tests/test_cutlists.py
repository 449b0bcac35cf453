"""Editors' cut lists: CMX 3600 EDLs and OpenTimelineIO files in and out, placed by timecode."""

import re

import opentimelineio as otio
import pytest

from framestyle.errors import FramestyleError
from framestyle.shots import Shot, shots_from_boundaries
from framestyle.shots.cutlists import cut_list_timecode, read_cut_list, shots_timeline, write_cut_list
from framestyle.shots.lists import parse_shot_file
from framestyle.timecode import ClipTimecode

PLATE = range(1001, 1061)  # a 60-frame plate numbered from 1001
SHOTS = shots_from_boundaries([10, 35], 60)
TC25 = ClipTimecode(25, "01:00:00:00")
# CMX 3600 event line (from memory of the layout): 3-digit event number, reel (up to 8
# characters), channel, transition (C = cut), then source in/out and record in/out.
EVENT = re.compile(r"^(\d{3})  (.{8}) (V|A|B)\s+C\s+((?:\d\d:\d\d:\d\d[:;]\d\d ?){4})$")


def events(text: str) -> list[tuple[str, ...]]:
    """(event, reel, channel, source in, source out, record in, record out) of each event line."""
    return [(m[1], m[2].strip(), m[3], *m[4].split()) for m in map(EVENT.match, text.splitlines()) if m]


def editors_edl(path, first_record="01:00:00:00", rows=None):
    """An EDL as editing software writes it: camera source timecodes, record from 01:00:00:00."""
    rows = rows or [("A001C003", "14:22:05:10", "14:22:05:20", first_record, "01:00:00:10"),
                    ("A001C007", "14:31:40:00", "14:31:41:00", "01:00:00:10", "01:00:01:10"),
                    ("A002C001", "09:05:00:00", "09:05:01:00", "01:00:01:10", "01:00:02:10")]
    lines = ["TITLE: harbour cut v3", "FCM: NON-DROP FRAME", ""]
    for n, (reel, src_in, src_out, rec_in, rec_out) in enumerate(rows, start=1):
        lines += [f"{n:03d}  {reel:8} V     C        {src_in} {src_out} {rec_in} {rec_out}",
                  f"* FROM CLIP NAME:  {reel}.mov"]
    path.write_text("\n".join(lines) + "\n", encoding="utf-8")
    return path


# ----- out: EDL and OTIO of our shots ---------------------------------------------------


def test_edl_written_is_cmx_3600_and_read_back_identically_by_opentimelineio(tmp_path):
    path = tmp_path / "harbour_plate.edl"
    write_cut_list(path, SHOTS, TC25, "harbour_plate", "/footage/harbour_plate.mov")
    text = path.read_text()
    assert text.startswith("TITLE: harbour_plate\nFCM: NON-DROP FRAME\n")
    # One event per shot; source and record timecodes from the clip's 01:00:00:00 at 25 fps
    # (SMPTE ST 12-1: 10 frames = 00:00:00:10, 35 frames = 00:00:01:10).
    assert events(text) == [
        ("001", "harbourp", "V", "01:00:00:00", "01:00:00:10", "01:00:00:00", "01:00:00:10"),
        ("002", "harbourp", "V", "01:00:00:10", "01:00:01:10", "01:00:00:10", "01:00:01:10"),
        ("003", "harbourp", "V", "01:00:01:10", "01:00:02:10", "01:00:01:10", "01:00:02:10"),
    ]
    # Reference: OpenTimelineIO's own CMX 3600 adapter reads the same events back ...
    timeline = otio.adapters.read_from_file(str(path), adapter_name="cmx_3600", rate=25)
    clips = list(timeline.find_clips())
    assert [c.name for c in clips] == ["harbour_plate"] * 3
    assert [(c.source_range.start_time.value, c.source_range.duration.value) for c in clips] == [
        (90000, 10), (90010, 25), (90035, 25)]
    records = [c.transformed_time_range(c.trimmed_range(), timeline.tracks).start_time.value for c in clips]
    assert records == [90000, 90010, 90035]
    # ... and writes them out again line for line (it drops only the FCM header line).
    again = otio.adapters.write_to_string(timeline, adapter_name="cmx_3600", rate=25)
    assert again == text.replace("FCM: NON-DROP FRAME\n", "")
    # framestyle's shot list from the EDL is the shots written.
    assert parse_shot_file(path, PLATE, TC25) == SHOTS


def test_drop_frame_edl_round_trips_across_a_minute_boundary(tmp_path):
    clock = ClipTimecode(29.97, "00:00:59;20")
    path = tmp_path / "cut.edl"
    write_cut_list(path, SHOTS, clock, "dusk", "/footage/dusk.mov")
    text = path.read_text()
    assert "FCM: DROP FRAME" in text
    # SMPTE ST 12-1 drop-frame: 00:00:59;20 + 10 frames = 00:01:00;02 (00 and 01 skipped).
    assert events(text)[1][3:5] == ("00:01:00;02", "00:01:00;27")
    assert parse_shot_file(path, PLATE, clock) == SHOTS


def test_non_drop_29_97_clip_is_refused_for_edl_but_written_as_otio(tmp_path):
    clock = ClipTimecode(30000 / 1001, "01:00:00:00")
    with pytest.raises(FramestyleError, match=r"cut.edl: .*non-drop; write an .otio file instead"):
        write_cut_list(tmp_path / "cut.edl", SHOTS, clock, "dusk", "/footage/dusk.mov")
    write_cut_list(tmp_path / "cut.otio", SHOTS, clock, "dusk", "/footage/dusk.mov")
    assert parse_shot_file(tmp_path / "cut.otio", PLATE, clock) == SHOTS
    assert sorted(p.name for p in tmp_path.iterdir()) == ["cut.otio"]
    # read back for a clip without timecode of its own, it keeps counting non-drop
    assert cut_list_timecode(tmp_path / "cut.otio", ClipTimecode(30000 / 1001)) == clock


@pytest.mark.parametrize("fcm, record_in, label", [
    ("FCM: NON-DROP FRAME", "01:00:00:00", "01:00:00:00"),
    ("FCM: DROP FRAME", "01:00:00;00", "01:00:00;00"),
    # the FCM line decides, whatever the separators (CMX 3600, from memory): a drop-frame list
    # written with ':' (as many writers do) was placed 108 frames late
    ("FCM: DROP FRAME", "01:00:00:00", "01:00:00;00"),
    ("FCM: NON-DROP FRAME", "01:00:00;00", "01:00:00:00"),
    ("", "01:00:00:00", "01:00:00:00"),  # no FCM line: the record timecode's own separator says
])
def test_a_29_97_cut_places_a_clip_without_timecode_in_its_own_counting_mode(tmp_path, fcm, record_in, label):
    # Non-drop 01:00:00:00 is frame 108000 at 30 frames a label-second, which drop-frame
    # counting would label 01:00:03;18 (SMPTE ST 12-1: 108 numbers dropped in the hour)
    path = tmp_path / "cut.edl"
    end = "01:00:01:00" if ":" == record_in[-3] else "01:00:01;00"
    path.write_text(f"TITLE: night\n{fcm}\n\n001  A001C003 V     C        {record_in} {end} {record_in} {end}\n",
                    encoding="utf-8")
    clock = cut_list_timecode(path, ClipTimecode(30000 / 1001))
    assert clock.start == label and clock.label(30) == ("01:00:01:00" if ":" == label[-3] else "01:00:01;00")


def test_a_drop_frame_edl_for_a_25_fps_clip_and_an_edl_with_a_byte_order_mark(tmp_path):
    path = tmp_path / "cut.edl"
    event = "001  A001C003 V     C        10:00:00:00 10:00:02:10 01:00:00:00 01:00:02:10\n"
    path.write_text(f"TITLE: night\nFCM: DROP FRAME\n\n{event}", encoding="utf-8")
    with pytest.raises(FramestyleError, match=r"cut.edl: the cut list counts drop-frame, which exists only at "
                                              r"29.97 and 59.94 frames/s; the clip is at 25$"):
        parse_shot_file(path, PLATE, TC25)  # drop-frame exists at 29.97 and 59.94 only (SMPTE ST 12-1)
    path.write_text(f"TITLE: night\nFCM: NON-DROP FRAME\n\n{event}", encoding="utf-8-sig")  # a BOM first
    assert parse_shot_file(path, PLATE, TC25) == [Shot(1, 0, 59)]


def test_comments_above_the_first_event_are_read_past_and_a_nested_stack_is_refused(tmp_path):
    path = tmp_path / "cut.edl"
    path.write_text("TITLE: night\nFCM: NON-DROP FRAME\n\n* COMMENT: reel list v2\n"
                    "001  A001C003 V     C        10:00:00:00 10:00:00:10 01:00:00:00 01:00:00:10\n"
                    "* FROM CLIP NAME: A001C003.mov\n"
                    "002  A001C007 V     C        11:00:00:00 11:00:02:00 01:00:00:10 01:00:02:10\n", encoding="utf-8")
    assert parse_shot_file(path, PLATE, TC25) == [Shot(1, 0, 9), Shot(2, 10, 59)]
    rate = 25.0
    timeline = otio.schema.Timeline(global_start_time=otio.opentime.RationalTime(90000, rate))
    track, nest, inner = otio.schema.Track(), otio.schema.Stack(name="nest"), otio.schema.Track()

    def clip(length):
        return otio.schema.Clip(source_range=otio.opentime.TimeRange(otio.opentime.RationalTime(0, rate),
                                                                     otio.opentime.RationalTime(length, rate)))
    track.append(clip(20))
    inner.extend([clip(20), clip(20)])
    nest.append(inner)
    track.append(nest)
    timeline.tracks.append(track)
    otio.adapters.write_to_file(timeline, str(tmp_path / "nested.otio"))
    with pytest.raises(FramestyleError, match=r"nested.otio: holds a nested stack \(nest, a compound clip\)"):
        parse_shot_file(tmp_path / "nested.otio", PLATE, TC25)


def test_edl_reel_names_are_cmx_reels_and_a_clip_past_midnight_is_refused(tmp_path):
    path = tmp_path / "cut.edl"
    write_cut_list(path, SHOTS, TC25, "my take #2 (v3).mov", "/footage/my take #2 (v3).mov")
    assert {reel for _, reel, *_ in events(path.read_text())} == {"mytake2v"}  # 8 letters or digits, no spaces
    assert [c.metadata["cmx_3600"]["reel"] for c in otio.adapters.read_from_file(str(path)).find_clips()] == [
        "mytake2v"] * 3  # reference: OpenTimelineIO's cmx_3600 reader
    late = ClipTimecode(25, "23:59:59:00")
    with pytest.raises(FramestyleError, match=r"cut.edl: the clip's timecode runs past midnight \(23:59:59:00 to "
                                              r"00:00:01:09\), which an EDL cannot hold; write an .otio file"):
        write_cut_list(path, SHOTS, late, "dusk", "/footage/dusk.mov")
    write_cut_list(tmp_path / "cut.otio", SHOTS, late, "dusk", "/footage/dusk.mov")
    assert parse_shot_file(tmp_path / "cut.otio", PLATE, late) == SHOTS


def test_otio_written_reads_back_with_its_start_and_shot_numbers(tmp_path):
    path = tmp_path / "harbour_plate.otio"
    write_cut_list(path, SHOTS, TC25, "harbour_plate", "/footage/harbour_plate.mov")
    timeline = otio.adapters.read_from_file(str(path))  # reference: OpenTimelineIO's otio_json adapter
    assert otio.opentime.to_timecode(timeline.global_start_time) == "01:00:00:00"
    clips = list(timeline.find_clips())
    assert [c.metadata["framestyle"]["shot"] for c in clips] == [1, 2, 3]
    assert [c.media_reference.target_url for c in clips] == ["/footage/harbour_plate.mov"] * 3
    assert [c.range_in_parent().duration.value for c in clips] == [10, 25, 25]
    assert parse_shot_file(path, PLATE, TC25) == SHOTS


def test_otio_of_a_frame_folder_refers_to_its_frames_as_an_image_sequence(tmp_path):
    import cv2
    import numpy as np

    from framestyle import io

    plate = tmp_path / "harbour plate"
    plate.mkdir()
    for number in PLATE:
        cv2.imwrite(str(plate / f"hp_{number:05d}.png"), np.full((4, 6, 3), number % 256, np.uint8))
    source = io.open_source(plate)
    write_cut_list(tmp_path / "cut.otio", SHOTS, TC25, "harbour plate", str(plate), source)
    clips = list(otio.adapters.read_from_file(str(tmp_path / "cut.otio")).find_clips())
    reference = clips[1].media_reference  # reference: OpenTimelineIO's ImageSequenceReference arithmetic
    assert isinstance(reference, otio.schema.ImageSequenceReference)
    assert reference.frame_for_time(clips[1].source_range.start_time) == 1011  # shot 2 starts at position 10
    assert reference.target_url_for_image_number(10) == (plate / "hp_01011.png").as_uri()
    assert parse_shot_file(tmp_path / "cut.otio", PLATE, TC25) == SHOTS
    (plate / "hp_01030.png").unlink()  # a gap: the folder itself, as one reference
    write_cut_list(tmp_path / "gap.otio", shots_from_boundaries([10, 35], 59), TC25, "harbour plate", str(plate),
                   io.open_source(plate))
    clip = otio.adapters.read_from_file(str(tmp_path / "gap.otio")).find_clips()[0]
    assert clip.media_reference.target_url == str(plate)


def test_timeline_of_shots_matches_source_and_record():
    timeline = shots_timeline(SHOTS, TC25, "harbour_plate", "/footage/harbour_plate.mov")
    clip = list(timeline.find_clips())[1]
    assert otio.opentime.to_timecode(clip.source_range.start_time) == "01:00:00:10"
    record = clip.range_in_parent().start_time + timeline.global_start_time
    assert otio.opentime.to_timecode(record) == "01:00:00:10"


def test_cut_list_of_another_kind_is_refused(tmp_path):
    with pytest.raises(FramestyleError, match=r"cut.xml: a cut list is written as .edl"):
        write_cut_list(tmp_path / "cut.xml", SHOTS, TC25, "x", "/x.mov")


# ----- in: an editor's EDL or OTIO ------------------------------------------------------


def test_editors_edl_places_events_by_record_timecode(tmp_path):
    path = editors_edl(tmp_path / "harbour_v3.edl")
    # A clip exported from that cut, starting at 01:00:00:00 ...
    assert parse_shot_file(path, PLATE, TC25) == SHOTS
    # ... or without timecode of its own: it starts where the cut's record starts.
    assert parse_shot_file(path, PLATE, ClipTimecode(25)) == SHOTS
    assert read_cut_list(path, TC25, 60) == [0, 10, 35]


def test_a_clip_without_timecode_takes_the_cuts_record_start(tmp_path):
    path = editors_edl(tmp_path / "harbour_v3.edl",
                       rows=[("A001C003", "14:22:05:10", "14:22:07:20", "00:59:58:00", "01:00:00:10"),
                             ("A001C007", "14:31:40:00", "14:31:41:00", "01:00:00:10", "01:00:01:10")])
    assert cut_list_timecode(path, ClipTimecode(25)) == ClipTimecode(25, "00:59:58:00")
    assert cut_list_timecode(path, TC25) == TC25  # a clip's own timecode stays
    with pytest.raises(FramestyleError, match="the cut starts at 00:59:58:00 but the clip's first frame is 01:00") as e:
        parse_shot_file(path, PLATE, TC25)
    assert str(e.value).endswith("give --start-timecode 00:59:58:00")  # the way to place it, said
    assert len(parse_shot_file(path, range(1001, 1086), ClipTimecode(25, "00:59:58:00"))) == 2  # 85 frames: it works


def test_edl_is_recognised_by_its_content_too(tmp_path):
    path = editors_edl(tmp_path / "cut_from_editorial.txt")
    assert parse_shot_file(path, PLATE, TC25) == SHOTS


def test_editors_otio_with_a_start_time_and_a_dissolve_gives_one_shot_per_clip(tmp_path):
    rate = 24
    timeline = otio.schema.Timeline(name="cut", global_start_time=otio.opentime.from_timecode("01:00:00:00", rate))
    track = otio.schema.Track(kind=otio.schema.TrackKind.Video)
    for name, length in (("a", 12), ("b", 30), ("c", 18)):
        track.append(otio.schema.Clip(name=name, source_range=otio.opentime.TimeRange(
            otio.opentime.RationalTime(500, rate), otio.opentime.RationalTime(length, rate))))
    track.insert(2, otio.schema.Transition(in_offset=otio.opentime.RationalTime(4, rate),
                                           out_offset=otio.opentime.RationalTime(4, rate)))
    timeline.tracks.append(track)
    timeline.tracks.append(otio.schema.Track(kind=otio.schema.TrackKind.Audio))
    path = tmp_path / "cut.otio"
    otio.adapters.write_to_file(timeline, str(path))
    # The dissolve's edit point is where clip b meets clip c (OpenTimelineIO: transitions
    # overlap neighbours without taking time of their own).
    assert parse_shot_file(path, range(60), ClipTimecode(24, "01:00:00:00")) == [
        Shot(1, 0, 11), Shot(2, 12, 41), Shot(3, 42, 59)]


def bad_edl(tmp_path, rows):
    return editors_edl(tmp_path / "cut.edl", rows=rows)


@pytest.mark.parametrize(
    "rows, clock, words",
    [
        ([("A", "10:00:00:00", "10:00:02:12", "01:00:00:00", "01:00:02:12")], TC25,
         "the cut (62 frames, to 01:00:02:11) is longer than the clip (01:00:00:00-01:00:02:09, 60 frames)"),
        ([("A", "10:00:00:00", "10:00:02:00", "01:00:00:00", "01:00:02:00")], TC25, "is shorter than the clip"),
        ([("A", "10:00:00:00", "10:00:02:10", "00:59:59:24", "01:00:02:09")], TC25,
         "the cut starts at 00:59:59:24 but the clip's first frame is 01:00:00:00"),
        ([("A", "10:00:00:00", "10:00:01:00", "01:00:00:00", "01:00:01:00"),
          ("B", "10:00:00:00", "10:00:01:10", "01:00:01:05", "01:00:02:15")], TC25,
         "no event from 01:00:01:00 to 01:00:01:04"),
        ([("A", "10:00:00:00", "10:00:01:00", "01:00:00:00", "01:00:01:00"),
          ("B", "10:00:00:00", "10:00:01:10", "01:00:00:20", "01:00:02:05")], TC25,
         "the event recorded from 01:00:00:20 starts before the event listed above it ends; list the events in "
         "record order, without overlaps"),
        ([("B", "10:00:00:00", "10:00:01:10", "01:00:01:00", "01:00:02:10"),
          ("A", "10:00:00:00", "10:00:01:00", "01:00:00:00", "01:00:01:00")], TC25,
         "the event recorded from 01:00:00:00 starts before the event listed above it ends"),
        ([("A", "10:00:00:00", "10:00:00:28", "01:00:00:00", "01:00:00:28")], ClipTimecode(24, "01:00:00:00"),
         "not a readable CMX 3600 EDL at 24 frames/s"),
    ],
)
def test_cut_lists_that_do_not_fit_the_clip_are_named_in_one_line(tmp_path, rows, clock, words):
    path = bad_edl(tmp_path, rows)
    with pytest.raises(FramestyleError) as error:
        parse_shot_file(path, PLATE, clock)
    message = str(error.value)
    assert message.startswith(f"{path}: ") and words in message and "\n" not in message


def test_edl_without_events_is_named(tmp_path):
    path = tmp_path / "empty.edl"
    path.write_text("TITLE: nothing yet\nFCM: NON-DROP FRAME\n", encoding="utf-8")
    with pytest.raises(FramestyleError, match=r"empty.edl: the cut list has no video events"):
        parse_shot_file(path, PLATE, TC25)


def test_otio_at_another_rate_or_with_two_video_tracks_is_named(tmp_path):
    path = tmp_path / "cut.otio"
    write_cut_list(path, SHOTS, ClipTimecode(24), "a", "/a.mov")
    with pytest.raises(FramestyleError, match=r"cut.otio: the cut is at 24 frames/s but the clip is at 25"):
        parse_shot_file(path, PLATE, ClipTimecode(25))
    timeline = otio.adapters.read_from_file(str(path))
    timeline.tracks.append(otio.schema.Track(kind=otio.schema.TrackKind.Video))
    otio.adapters.write_to_file(timeline, str(path))
    with pytest.raises(FramestyleError, match=r"cut.otio: has 2 video tracks; give a cut with one"):
        parse_shot_file(path, PLATE, ClipTimecode(24))


@pytest.mark.parametrize("name, content", [("cut.otio", "not json"), ("cut.otio", '{"OTIO_SCHEMA": "Clip.2"}'),
                                           ("cut.edl", "TITLE: x\nthis is no event\n")])
def test_unreadable_cut_lists_are_named(tmp_path, name, content):
    path = tmp_path / name
    path.write_text(content, encoding="utf-8")
    with pytest.raises(FramestyleError, match=rf"{name}: not a readable"):
        parse_shot_file(path, PLATE, TC25)


def test_a_hand_edited_edl_the_reader_cannot_place_is_one_line_not_a_traceback(tmp_path):
    # CMX 3600 gives each event its own number; two lines share one only for a dissolve (from memory)
    path = editors_edl(tmp_path / "hand.edl")
    path.write_text(path.read_text().replace("003  A002C001", "002  A002C001"))  # a number twice
    with pytest.raises(FramestyleError, match=r"hand.edl: not a readable CMX 3600 EDL: .* give every event its own "
                                              r"number \(only a dissolve's two lines share one\)"):
        parse_shot_file(path, PLATE, TC25)


def test_missing_cut_list_is_named(tmp_path):
    with pytest.raises(FramestyleError, match=r"gone.edl: cannot read the cut list"):
        parse_shot_file(tmp_path / "gone.edl", PLATE, TC25)
