#!/usr/bin/python3
"""A tree of small colour pictures for timing the look-alike stage on colour (docs/performance.md):
non-overlapping crops of SIDE px from photographs (Pillow, Debian python3-pil), in folders of
1,000, saved as PNG. Crops of one photograph share textures, colours and light; many are
near-uniform (sky, walls), as in real collections of small pictures.

Usage: colour_crops.py OUT SIDE COUNT SOURCE...
"""
import os
import sys

from PIL import Image


def main():
    out, side, count = sys.argv[1], int(sys.argv[2]), int(sys.argv[3])
    made = 0
    for src in sys.argv[4:]:
        im = Image.open(src).convert("RGB")
        if max(im.size) > 2400:
            im.thumbnail((2400, 2400), Image.LANCZOS)
        for y in range(0, im.height - side + 1, side):
            for x in range(0, im.width - side + 1, side):
                if made >= count:
                    return
                d = os.path.join(out, f"c{made // 1000:03d}")
                os.makedirs(d, exist_ok=True)
                im.crop((x, y, x + side, y + side)).save(os.path.join(d, f"{made:06d}.png"))
                made += 1


if __name__ == "__main__":
    main()
