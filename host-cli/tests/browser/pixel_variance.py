"""Fails (exit 1) when a screenshot is blank: the variance of its grey levels is below a
floor, or almost every pixel is the background colour. Prints the figures.

Usage: python3 pixel_variance.py SCREENSHOT.png

The floors are common practice, no source: a white page with one line of text has a grey
variance of a few tens; a report page with plots has several hundred to thousands.
"""
import sys

from PIL import Image, ImageStat

VARIANCE_FLOOR = 200.0
INK_FRACTION_FLOOR = 0.02


def main(path):
    image = Image.open(path).convert("L")
    variance = ImageStat.Stat(image).var[0]
    histogram = image.histogram()
    total = sum(histogram)
    background = max(range(256), key=lambda level: histogram[level])
    ink = 1.0 - histogram[background] / total
    ok = variance >= VARIANCE_FLOOR and ink >= INK_FRACTION_FLOOR
    print(
        f"pixel check: {path}: {image.size[0]}x{image.size[1]}, grey variance {variance:.1f} "
        f"(floor {VARIANCE_FLOOR}), non-background pixels {100 * ink:.1f} % "
        f"(floor {100 * INK_FRACTION_FLOOR:.0f} %): {'ok' if ok else 'BLANK'}"
    )
    return 0 if ok else 1


if __name__ == "__main__":
    sys.exit(main(sys.argv[1]))
