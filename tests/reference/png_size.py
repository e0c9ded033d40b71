"""Prints "WIDTH HEIGHT CHANNELS" for each PNG file given, decoded independently of spar.

Usage: png_size.py FILE.png...

Uses the decoder of check_png.py (written from the PNG specification on python's zlib):
chunk CRCs are checked, the image data inflated and every row's filter undone, so a file
that prints here is a complete, valid PNG of that size.
"""
import os
import sys

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from check_png import decode  # noqa: E402


def main():
    for path in sys.argv[1:]:
        with open(path, "rb") as f:
            width, height, channels, pixels, _ = decode(f.read())
        assert len(pixels) == width * height * channels
        print(width, height, channels)
    return 0


if __name__ == "__main__":
    sys.exit(main())
