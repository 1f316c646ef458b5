// Test support: Fashion-MNIST (Xiao, Rasul & Vollgraf 2017, arXiv:1708.07747; Debian
// package dataset-fashion-mnist) exported as a class-folder tree of PNGs.
#pragma once

#include <cstdint>
#include <filesystem>
#include <string>
#include <vector>

namespace tamis::test {

struct IdxImages {
  uint32_t count = 0, rows = 0, cols = 0;
  std::vector<uint8_t> pixels;  // count * rows * cols
};

// Reads a gzip-compressed IDX file (LeCun's IDX format: big-endian magic 0x0803 for
// unsigned-byte 3-D data, 0x0801 for 1-D labels, then the dimensions, then data).
IdxImages read_idx_images(const std::filesystem::path& gz);
std::vector<uint8_t> read_idx_labels(const std::filesystem::path& gz);

// The ten class names of Fashion-MNIST, in label order (from the data set's README).
const std::vector<std::string>& fashion_mnist_classes();

// Exports all 70,000 images (train then t10k) as <root>/<class>/<train|t10k>_<index>.png,
// 8-bit gray. Reuses an earlier complete export in the test cache. Returns <root>.
std::filesystem::path fashion_mnist_tree();

// Directory of the Debian package's files.
inline const std::filesystem::path kFashionMnistDir = "/usr/share/datasets/fashion-mnist";

}  // namespace tamis::test
