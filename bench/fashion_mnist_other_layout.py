#!/usr/bin/python3
"""Fashion-MNIST laid out as another tool would: Pillow's PNG writer (zlib level 6,
its own filter choice) instead of OpenCV's, files named by their global index
(00000.png .. 69999.png) and written in the data set's order, so that the class
folders fill in turn, interleaved, as a loader-side export does.
Usage: fashion_mnist_other_layout.py OUT_DIR   (Debian dataset-fashion-mnist, python3-pil)
Then: bash bench/compare_jpeg.sh OUT_DIR 3 read
"""
import gzip
import os
import struct
import sys

from PIL import Image

SRC = "/usr/share/datasets/fashion-mnist"
# The ten class names in label order, from the data set's README.
NAMES = ["T-shirt_top", "Trouser", "Pullover", "Dress", "Coat", "Sandal", "Shirt", "Sneaker", "Bag", "Ankle_boot"]


def idx(path):
    with gzip.open(path, "rb") as f:
        data = f.read()
    magic, n = struct.unpack_from(">II", data, 0)
    if magic == 0x0803:
        rows, cols = struct.unpack_from(">II", data, 8)
        return n, rows, cols, data[16:]
    return n, 0, 0, data[8:]


out = sys.argv[1]
for name in NAMES:
    os.makedirs(os.path.join(out, name), exist_ok=True)
k = 0
for part in ("train", "t10k"):
    n, rows, cols, pixels = idx(f"{SRC}/{part}-images-idx3-ubyte.gz")
    _, _, _, labels = idx(f"{SRC}/{part}-labels-idx1-ubyte.gz")
    for i in range(n):
        img = Image.frombytes("L", (cols, rows), pixels[i * rows * cols:(i + 1) * rows * cols])
        img.save(os.path.join(out, NAMES[labels[i]], f"{k:05d}.png"))
        k += 1
print(f"wrote {k} PNGs into {out}")
