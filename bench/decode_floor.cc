// The floors a whole audit is compared with (docs/performance.md), on N threads:
//   decode: read each file once and decode it with libjpeg-turbo at 1/8 scale, nothing else;
//   read:   open and read every file, nothing else.
// Usage: decode_floor decode|read ROOT [THREADS=2]   (prints seconds and files)
#include <turbojpeg.h>

#include <algorithm>
#include <atomic>
#include <chrono>
#include <cstdio>
#include <filesystem>
#include <fstream>
#include <iterator>
#include <string>
#include <vector>

#include "tamis/base/parallel.h"

int main(int argc, char** argv) {
  if (argc < 3) return 2;
  const std::string mode = argv[1];
  const unsigned threads = argc > 3 ? static_cast<unsigned>(std::atoi(argv[3])) : 2;
  std::vector<std::filesystem::path> files;
  for (const auto& e : std::filesystem::recursive_directory_iterator(argv[2]))
    if (e.is_regular_file()) files.push_back(e.path());
  std::sort(files.begin(), files.end());
  auto t0 = std::chrono::steady_clock::now();
  std::atomic<size_t> failures{0};
  tamis::parallel_for(files.size(), threads, [&](size_t i) {
    std::ifstream is(files[i], std::ios::binary);
    std::vector<unsigned char> b((std::istreambuf_iterator<char>(is)), {});
    if (mode != "decode") return;
    thread_local tjhandle tj = tjInitDecompress();
    int w = 0, h = 0, ss = 0, cs = 0;
    if (tjDecompressHeader3(tj, b.data(), b.size(), &w, &h, &ss, &cs) != 0) {
      ++failures;
      return;
    }
    tjscalingfactor eighth{1, 8};
    int sw = TJSCALED(w, eighth), sh = TJSCALED(h, eighth);
    std::vector<unsigned char> out(size_t(sw) * sh * 3);
    if (tjDecompress2(tj, b.data(), b.size(), out.data(), sw, 0, sh, TJPF_BGR, 0) != 0) ++failures;
  }, 4);
  double s = std::chrono::duration<double>(std::chrono::steady_clock::now() - t0).count();
  std::printf("%s floor: %zu files, %.3f s on %u threads, %zu failures\n", mode.c_str(), files.size(), s, threads,
              failures.load());
  return failures ? 1 : 0;
}
