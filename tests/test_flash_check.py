"""The flash check as users meet it: `framestyle flashes`, and the check every render records.

The verdicts come from the definitions of W3C WCAG 2.1 SC 2.3.1 ("Three Flashes or Below
Threshold") and its definition "general flash and red flash thresholds", and from ITU-R
BT.1702 (a quarter of the screen); the analysis itself is tested in tests/test_flashes.py.
"""

from framestyle import store


def test_store_records_flash_checks_of_the_render_and_of_each_shot_and_a_restart_discards_them(tmp_path):
    out = store.Store(tmp_path / "out")
    assert out.flash_check("render") is None and out.flash_plot() is None
    out.write_flash_check("render", {"passed": False})
    out.write_flash_check("source", {"passed": True}, shot=3)
    assert out.flash_check("render") == {"passed": False}
    assert out.flash_check("source", shot=3) == {"passed": True}
    assert out.flash_check("source") is None and out.flash_check("render", shot=3) is None
    (out.out / store.FLASH_PLOT).write_bytes(b"png")
    assert out.flash_plot() == out.out / store.FLASH_PLOT
    with out.folder_lock():
        out.restart([])
    assert out.flash_check("render") is None and out.flash_check("source", shot=3) is None
    assert out.flash_plot() is None
