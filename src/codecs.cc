#include "tamis/codecs.h"

#include <dlfcn.h>

#include <mutex>
#include <stdexcept>

namespace tamis {

namespace {

// The functions' names as the Itanium C++ ABI (GCC, Clang) mangles them:
//   cv::imdecode(cv::_InputArray const&, int)
//   cv::imencode(std::string const&, cv::_InputArray const&, std::vector<uchar>&, std::vector<int> const&)
constexpr const char* kImdecode = "_ZN2cv8imdecodeERKNS_11_InputArrayEi";
constexpr const char* kImencode =
    "_ZN2cv8imencodeERKNSt7__cxx1112basic_stringIcSt11char_traitsIcESaIcEEERKNS_11_InputArrayERSt6vectorIhSaIhEERKSB_IiSaIiEE";

using ImdecodeFn = cv::Mat (*)(const cv::_InputArray&, int);
using ImencodeFn = bool (*)(const std::string&, const cv::_InputArray&, std::vector<uchar>&, const std::vector<int>&);

struct Codecs {
  ImdecodeFn imdecode = nullptr;
  ImencodeFn imencode = nullptr;
  std::string error;
};

const Codecs& codecs() {
  static const Codecs c = [] {
    Codecs out;
    // TAMIS_OPENCV_IMGCODECS: the library's file name, from the build (CMakeLists.txt).
    void* lib = dlopen(TAMIS_OPENCV_IMGCODECS, RTLD_NOW | RTLD_LOCAL);
    if (!lib) {
      const char* e = dlerror();
      out.error = std::string("cannot load ") + TAMIS_OPENCV_IMGCODECS + ": " + (e ? e : "unknown error");
      return out;
    }
    out.imdecode = reinterpret_cast<ImdecodeFn>(dlsym(lib, kImdecode));
    out.imencode = reinterpret_cast<ImencodeFn>(dlsym(lib, kImencode));
    if (!out.imdecode || !out.imencode) out.error = std::string(TAMIS_OPENCV_IMGCODECS) + " lacks cv::imdecode or cv::imencode";
    return out;  // the library stays loaded for the life of the process
  }();
  if (!c.error.empty()) throw std::runtime_error(c.error);
  return c;
}

}  // namespace

cv::Mat opencv_imdecode(std::span<const uint8_t> bytes, int flags) {
  const Codecs& c = codecs();
  try {
    cv::Mat buf(1, static_cast<int>(bytes.size()), CV_8U, const_cast<uint8_t*>(bytes.data()));
    return c.imdecode(buf, flags);
  } catch (const cv::Exception&) {
    return {};
  }
}

bool opencv_imencode(const std::string& ext, const cv::Mat& image, std::vector<uint8_t>& out,
                     const std::vector<int>& params) {
  const Codecs& c = codecs();
  try {
    return c.imencode(ext, image, out, params);
  } catch (const cv::Exception&) {
    return false;
  }
}

}  // namespace tamis
