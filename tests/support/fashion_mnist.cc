#include "fashion_mnist.h"

#include <zlib.h>

#include <fstream>
#include <stdexcept>

#include <opencv2/imgcodecs.hpp>

#include "tamis/base/parallel.h"
#include "temp_tree.h"

namespace tamis::test {

namespace {
std::vector<uint8_t> gunzip(const std::filesystem::path& p) {
  gzFile f = gzopen(p.c_str(), "rb");
  if (!f) throw std::runtime_error("cannot open " + p.string());
  std::vector<uint8_t> out;
  uint8_t buf[1 << 16];
  int n;
  while ((n = gzread(f, buf, sizeof buf)) > 0) out.insert(out.end(), buf, buf + n);
  gzclose(f);
  if (n < 0) throw std::runtime_error("cannot inflate " + p.string());
  return out;
}
uint32_t be32(const std::vector<uint8_t>& b, size_t off) {
  if (off + 4 > b.size()) throw std::runtime_error("IDX file too short");
  return (uint32_t{b[off]} << 24) | (uint32_t{b[off + 1]} << 16) | (uint32_t{b[off + 2]} << 8) | b[off + 3];
}
}  // namespace

IdxImages read_idx_images(const std::filesystem::path& gz) {
  auto b = gunzip(gz);
  if (be32(b, 0) != 0x00000803) throw std::runtime_error("not an IDX image file: " + gz.string());
  IdxImages out{be32(b, 4), be32(b, 8), be32(b, 12), {}};
  size_t n = size_t{out.count} * out.rows * out.cols;
  if (b.size() != 16 + n) throw std::runtime_error("IDX image file has the wrong length");
  out.pixels.assign(b.begin() + 16, b.end());
  return out;
}

std::vector<uint8_t> read_idx_labels(const std::filesystem::path& gz) {
  auto b = gunzip(gz);
  if (be32(b, 0) != 0x00000801) throw std::runtime_error("not an IDX label file: " + gz.string());
  uint32_t n = be32(b, 4);
  if (b.size() != 8 + size_t{n}) throw std::runtime_error("IDX label file has the wrong length");
  return std::vector<uint8_t>(b.begin() + 8, b.end());
}

const std::vector<std::string>& fashion_mnist_classes() {
  static const std::vector<std::string> names{"t-shirt_top", "trouser", "pullover", "dress", "coat",
                                              "sandal",      "shirt",   "sneaker",  "bag",   "ankle_boot"};
  return names;
}

std::filesystem::path fashion_mnist_tree() {
  auto root = test_cache_dir() / "fashion-mnist-png";
  auto marker = test_cache_dir() / "fashion-mnist-png.complete";
  if (std::filesystem::exists(marker)) return root;
  std::filesystem::remove_all(root);
  for (const auto& c : fashion_mnist_classes()) std::filesystem::create_directories(root / c);
  for (const char* part : {"train", "t10k"}) {
    std::string p(part);
    IdxImages img = read_idx_images(kFashionMnistDir / (p + "-images-idx3-ubyte.gz"));
    std::vector<uint8_t> labels = read_idx_labels(kFashionMnistDir / (p + "-labels-idx1-ubyte.gz"));
    if (labels.size() != img.count) throw std::runtime_error("label and image counts differ");
    parallel_for(img.count, 0, [&](size_t i) {
      cv::Mat m(static_cast<int>(img.rows), static_cast<int>(img.cols), CV_8UC1,
                img.pixels.data() + i * img.rows * img.cols);
      char name[32];
      std::snprintf(name, sizeof name, "%s_%05zu.png", part, i);
      auto path = root / fashion_mnist_classes().at(labels[i]) / name;
      if (!cv::imwrite(path.string(), m)) throw std::runtime_error("cannot write " + path.string());
    });
  }
  write_text(marker, "70000\n");
  return root;
}

}  // namespace tamis::test
