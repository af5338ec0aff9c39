"""Static export through plotly's kaleido (which drives the system Chromium).

Reference: the PNG format (W3C PNG specification): an 8-byte signature, then
the IHDR chunk holding width and height as big-endian 32-bit integers.
"""

from __future__ import annotations

import struct

from vesselnet.cli import main
from vesselnet.demos import demo_path


def test_view_writes_png(tmp_path, capsys):
    png = tmp_path / "figure.png"
    assert main(["view", str(demo_path("collateral")), "-o", str(tmp_path / "v.html"),
                 "--image", str(png)]) == 0
    data = png.read_bytes()
    assert data[:8] == b"\x89PNG\r\n\x1a\n" and data[12:16] == b"IHDR"
    width, height = struct.unpack(">II", data[16:24])
    assert width == 2 * 1200 and height > 2 * 400  # default width 1200 px at scale 2
    assert len(data) > 30_000  # a drawing, not an empty canvas
    assert str(png) in capsys.readouterr().out
