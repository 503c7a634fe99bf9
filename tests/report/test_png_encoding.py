"""The report's PNG files (zlib at the fastest level): they decode (Pillow) to the pixels
matplotlib's own PNG writer stores for the same figure."""

import io

import numpy as np
from PIL import Image

from phasegauge.report._canvas import new_figure
from phasegauge.report._files import atomic_save_figure, encode_png


def _figure():
    fig = new_figure(3.0, 2.0)
    ax = fig.add_subplot()
    ax.plot([0, 1, 2], [1, 3, 2], "-o", label="line")
    ax.set_xlabel("time")
    ax.set_ylabel("value")
    ax.legend()
    return fig


def test_saved_png_holds_the_pixels_matplotlib_writes(tmp_path):
    fig = _figure()
    data = atomic_save_figure(tmp_path / "plot.png", fig, dpi=80)
    assert (tmp_path / "plot.png").read_bytes() == data
    ours = Image.open(io.BytesIO(data))
    ours.load()
    reference = io.BytesIO()
    fig.savefig(reference, format="png", dpi=80)  # matplotlib's PNG of the same, laid-out figure
    theirs = np.asarray(Image.open(reference).convert("RGB"))
    assert ours.mode == "RGB"  # an opaque figure is stored without alpha
    assert ours.size == (240, 160)
    np.testing.assert_array_equal(np.asarray(ours), theirs)


def test_encode_png_round_trips_rgb_and_rgba():
    rng = np.random.default_rng(3)
    for channels, mode in ((3, "RGB"), (4, "RGBA")):
        pixels = rng.integers(0, 256, size=(17, 23, channels), dtype=np.uint8)
        pixels[5:9] = 255  # flat rows, as in plots
        image = Image.open(io.BytesIO(encode_png(pixels)))
        image.load()  # Pillow checks the chunks' CRC-32 and the zlib stream while decoding
        assert image.mode == mode
        np.testing.assert_array_equal(np.asarray(image), pixels)


def test_encode_png_at_each_level_decodes_to_the_same_pixels():
    """Any zlib level gives the same image (Pillow decodes it); a higher level packs plots no larger."""
    fig = _figure()
    fig.set_dpi(80)
    raw = io.BytesIO()
    fig.savefig(raw, format="raw", dpi=80)
    pixels = np.frombuffer(raw.getvalue(), dtype=np.uint8).reshape(160, 240, 4)[..., :3]
    sizes = []
    for level in (0, 1, 6, 9):
        data = encode_png(pixels, level=level)
        sizes.append(len(data))
        np.testing.assert_array_equal(np.asarray(Image.open(io.BytesIO(data))), pixels)
    assert sizes[0] > sizes[1] >= sizes[3]
