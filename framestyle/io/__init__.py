"""The I/O edge: input clips (numbered frame folders, video), still images, video encoding.

Inside framestyle frames are float32 ``(H, W, 3)`` RGB; file formats, channel order, sample
types and ffmpeg stay behind this package.
"""

from framestyle.io.source import (FrameSource, file_digests, fingerprint, frame_name, iter_frames, open_source, pick_frames,
                                  read_alpha, read_frame, read_image, source_timecode, sequence_warnings,
                                  transparent_share)
from framestyle.io.stills import IMAGE_EXTS, image_header, write_image
from framestyle.io.video import write_prores, write_video

__all__ = ["IMAGE_EXTS", "FrameSource", "file_digests", "fingerprint", "frame_name", "image_header", "iter_frames",
           "open_source", "pick_frames", "read_alpha", "read_frame", "read_image", "source_timecode", "sequence_warnings",
           "transparent_share", "write_image", "write_prores", "write_video"]
