"""The command line draws a progress bar while it reads a large sales file."""

from __future__ import annotations

import io

from appraise.commands import common


class _Terminal(io.StringIO):
    def isatty(self) -> bool:
        return True


def test_a_large_file_gets_a_bar_that_follows_the_reading(monkeypatch, tmp_path):
    path = tmp_path / "sales.csv"
    path.write_text(
        "Sale ID,Sale Price\n" + "".join(f"S-{i},{300000 + i}\n" for i in range(3000)),
        encoding="utf-8",
    )
    screen = _Terminal()
    monkeypatch.setattr(common.sys, "stderr", screen)
    monkeypatch.setattr(common, "BAR_BYTES", 1000)
    bar, progress = common._reading_bar(str(path))
    assert bar is not None
    progress(0.4, "reading rows (1,200 so far)")
    assert bar.n == 40
    bar.refresh()  # drawn now (tqdm draws at most ten times a second)
    progress(1.0, "done\x1b[2J")  # a control character in a message is shown escaped
    assert bar.n == 100
    bar.refresh()
    bar.close()
    drawn = screen.getvalue()
    assert "reading rows (1,200 so far)" in drawn and "100/100" in drawn
    assert "\x1b[2J" not in drawn and "\\x1b[2J" in drawn


def test_a_small_or_missing_file_gets_none(tmp_path):
    path = tmp_path / "small.csv"
    path.write_text("Sale ID,Sale Price\nA,300000\n", encoding="utf-8")
    assert common._reading_bar(str(path)) == (None, None)
    assert common._reading_bar(str(tmp_path / "absent.csv")) == (None, None)
