#!/usr/bin/python3
"""The browser harness (browser.py) on a hand-written page whose answer is
known: one good PNG image, one broken image, a summary table.

    test_browser.py [--keep DIR]

The good image is a PNG encoded here by the PNG specification (signature,
IHDR, one zlib-compressed IDAT, IEND; ISO/IEC 15948 §5, §11), 40 x 30 px of
solid red, placed at the page's top-left corner; the broken one is a data
URI of bytes that are no image. The page is taller than the window, so the
full-page screenshot must be taller than it too, and its top-left pixels
must be the red of the image. Prints one line per check and a last line
"N passed, M failed"; exits 1 when a check failed.
"""

import argparse
import base64
import os
import struct
import sys
import tempfile
import zlib

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from browser import BrowserError, check_report, find_chromium  # noqa: E402
from test_plot_flutter import Checks, png_size  # noqa: E402

IMAGE_WIDTH, IMAGE_HEIGHT = 40, 30
PAGE_HEIGHT = 2400  # CSS px of the spacer: taller than the 900 px window


def solid_png(width, height, rgb):
    """An 8-bit RGB PNG of one colour (ISO/IEC 15948: §5.2 signature, §11.2.2
    IHDR, §11.2.4 IDAT with filter type 0 per scanline, §11.2.5 IEND)."""
    def chunk(kind, data):
        return (struct.pack(">I", len(data)) + kind + data
                + struct.pack(">I", zlib.crc32(kind + data) & 0xFFFFFFFF))
    header = struct.pack(">IIBBBBB", width, height, 8, 2, 0, 0, 0)
    raw = b"".join(b"\x00" + bytes(rgb) * width for _ in range(height))
    return (b"\x89PNG\r\n\x1a\n" + chunk(b"IHDR", header) + chunk(b"IDAT", zlib.compress(raw))
            + chunk(b"IEND", b""))


def write_page(path):
    good = base64.b64encode(solid_png(IMAGE_WIDTH, IMAGE_HEIGHT, (255, 0, 0))).decode()
    broken = base64.b64encode(b"these bytes are no image").decode()
    page = f"""<!DOCTYPE html>
<html><head><meta charset="utf-8"><title>harness test page</title>
<style>body {{ margin: 0; font-family: sans-serif; }}
#good {{ position: absolute; left: 0; top: 0; }}</style></head>
<body>
<img id="good" alt="good image" src="data:image/png;base64,{good}">
<div style="padding-top: 60px">
<table id="summary">
  <thead><tr><th>quantity</th><th>value</th></tr></thead>
  <tbody>
    <tr><td>flutter speed (state space)</td><td><b>94.05</b>
        m/s</td></tr>
    <tr><td>LCO onset</td><td>none in the sweep</td></tr>
  </tbody>
</table>
<table id="other"><tr><td>not the summary</td></tr></table>
<img alt="broken image" src="data:image/png;base64,{broken}">
<div style="height: {PAGE_HEIGHT}px"></div>
</div></body></html>
"""
    with open(path, "w") as fh:
        fh.write(page)


def check_page(workdir):
    html = os.path.join(workdir, "page.html")
    shot = os.path.join(workdir, "page.png")
    write_page(html)
    result = check_report(html, shot, timeout=90)
    print(f"  chromium {result['chromium']}: started in {result['start_seconds']:.2f} s, "
          f"whole check {result['total_seconds']:.2f} s")

    images = [(i["alt"], i["loaded"], i["natural_width"], i["natural_height"])
              for i in result["images"]]
    assert images == [("good image", True, IMAGE_WIDTH, IMAGE_HEIGHT),
                      ("broken image", False, 0, 0)], f"images: {images}"
    assert result["images"][0]["src"].startswith("data:image/png;base64,iVBORw0KGgo"), \
        result["images"][0]["src"]
    assert len(result["images"][0]["src"]) == 60, "data URIs are cut to 60 characters"

    assert result["summary_rows"] == [
        ["quantity", "value"],
        ["flutter speed (state space)", "94.05 m/s"],
        ["LCO onset", "none in the sweep"],
    ], f"summary rows: {result['summary_rows']}"
    assert result["title"] == "harness test page", result["title"]
    assert result["console_errors"] == [], result["console_errors"]

    # Full page: the PNG covers the whole document at 1200 CSS px, scale 1.
    width, height = png_size(shot)
    assert [width, height] == result["screenshot_size"], (width, height)
    assert width == 1200 and height >= 60 + PAGE_HEIGHT, f"screenshot {width} x {height}"
    import matplotlib.image

    pixels = matplotlib.image.imread(shot)  # floats in 0..1, rows top to bottom
    corner = pixels[5:IMAGE_HEIGHT - 5, 5:IMAGE_WIDTH - 5, :3]
    assert (corner[..., 0] > 0.95).all() and (corner[..., 1:] < 0.05).all(), \
        "the screenshot's top-left corner is not the red image"


def check_missing_file(workdir):
    try:
        check_report(os.path.join(workdir, "no_such_report.html"),
                     os.path.join(workdir, "x.png"))
    except BrowserError as e:
        assert "no such file" in str(e), str(e)
    else:
        raise AssertionError("a missing HTML file was not reported")


def check_missing_chromium(workdir):
    saved = {k: os.environ.get(k) for k in ("PATH", "AEROSECT_CHROMIUM")}
    os.environ["PATH"] = workdir  # no chromium in here
    os.environ.pop("AEROSECT_CHROMIUM", None)
    try:
        find_chromium()
    except BrowserError as e:
        assert "apt-get install chromium" in str(e), str(e)
    else:
        raise AssertionError("a missing chromium was not reported")
    finally:
        for k, v in saved.items():
            if v is None:
                os.environ.pop(k, None)
            else:
                os.environ[k] = v


def main(argv):
    parser = argparse.ArgumentParser()
    parser.add_argument("--keep", help="write the page and its screenshot here and keep them")
    args = parser.parse_args(argv)
    checks = Checks()
    with tempfile.TemporaryDirectory(prefix="aerosect_browser_") as tmp:
        workdir = args.keep or tmp
        os.makedirs(workdir, exist_ok=True)
        checks.run("page with a good and a broken image and a summary table", check_page,
                   workdir)
        checks.run("missing HTML file is a BrowserError", check_missing_file, workdir)
        checks.run("missing chromium names the Debian packages", check_missing_chromium, workdir)
    return checks.summary()


if __name__ == "__main__":
    sys.exit(main(sys.argv[1:]))
