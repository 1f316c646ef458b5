#include "tamis/read/decode/codecs.h"

#include <dlfcn.h>
#include <link.h>

#include <cstring>
#include <iostream>
#include <mutex>
#include <stdexcept>
#include <streambuf>

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

// Library messages. OpenCV writes a line to std::cerr for each file it cannot
// decode ("imdecode_(''): can't read header: ..."), and libpng, which OpenCV
// leaves with its default handlers, writes its warnings to stderr ("libpng
// warning: iCCP: too short"). tamis accounts for every file itself (a reason
// code, a finding), so these never reach the terminal: while a thread is inside
// OpenCV's codecs (t_in_codecs), what it writes to std::cerr is dropped (other
// threads' writes pass through), and libpng read structures get a warning handler
// that drops the message (png_create_read_struct below).
thread_local int t_in_codecs = 0;

class CodecsSilencer : public std::streambuf {
 public:
  explicit CodecsSilencer(std::streambuf* next) : next_(next) {}

 protected:
  int overflow(int c) override {
    if (t_in_codecs) return traits_type::not_eof(c);
    return next_ && c != traits_type::eof() ? next_->sputc(static_cast<char>(c)) : traits_type::not_eof(c);
  }
  std::streamsize xsputn(const char* s, std::streamsize n) override { return t_in_codecs || !next_ ? n : next_->sputn(s, n); }
  int sync() override { return t_in_codecs || !next_ ? 0 : next_->pubsync(); }

 private:
  std::streambuf* next_;
};

struct InCodecs {
  InCodecs() { ++t_in_codecs; }
  ~InCodecs() { --t_in_codecs; }
};

// The loaded libpng's own png_create_read_struct (found among the loaded
// objects: libpng comes in with OpenCV's codecs, RTLD_LOCAL, so RTLD_NEXT does
// not see it).
using PngCreate = void* (*)(const char*, void*, void (*)(void*, const char*), void (*)(void*, const char*));
PngCreate real_png_create_read_struct() {
  static const PngCreate f = [] {
    PngCreate found = nullptr;
    dl_iterate_phdr(
        [](dl_phdr_info* info, size_t, void* data) {
          if (!info->dlpi_name || !std::strstr(info->dlpi_name, "/libpng")) return 0;
          void* h = dlopen(info->dlpi_name, RTLD_NOW | RTLD_NOLOAD);
          if (!h) return 0;
          *static_cast<PngCreate*>(data) = reinterpret_cast<PngCreate>(dlsym(h, "png_create_read_struct"));
          dlclose(h);  // RTLD_NOLOAD took a reference; the library stays loaded
          return *static_cast<PngCreate*>(data) ? 1 : 0;
        },
        &found);
    return found;
  }();
  return f;
}

void drop_png_warning(void*, const char*) {}

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
    static CodecsSilencer silencer(std::cerr.rdbuf());
    std::cerr.rdbuf(&silencer);
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
  const InCodecs quiet;
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
  const InCodecs quiet;
  try {
    return c.imencode(ext, image, out, params);
  } catch (const cv::Exception&) {
    return false;
  }
}

}  // namespace tamis

// Interposes libpng's png_create_read_struct for OpenCV's PNG decoder: the
// executable exports this definition (CMakeLists.txt: --export-dynamic-symbol),
// so OpenCV's call binds here; the structure is made by libpng's own function
// with a warning handler that drops the message when the caller gave none.
extern "C" __attribute__((visibility("default"))) void* png_create_read_struct(const char* version, void* error_ptr,
                                                                               void (*error_fn)(void*, const char*),
                                                                               void (*warn_fn)(void*, const char*)) {
  const tamis::PngCreate real = tamis::real_png_create_read_struct();
  if (!real) return nullptr;  // no libpng loaded: nobody who could have called this
  return real(version, error_ptr, error_fn, warn_fn ? warn_fn : tamis::drop_png_warning);
}
