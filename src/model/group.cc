#include "tamis/model/group.h"

namespace tamis {

std::string group_id(int64_t index) { return "g" + std::to_string(index + 1); }

bool link_in_range(const GroupLink& l, size_t n) {
  return l.a < l.b && l.b < n && l.turn >= -1 && l.turn < kDihedralCount && l.blur_step >= 0 && l.blur_step < kBlurSteps &&
         l.fit_source >= 0 && l.fit_source <= 2 && l.jpeg_quality >= 0 &&
         l.jpeg_quality <= 100;
}

const char* turn_name(int t) {
  static const char* const names[kDihedralCount] = {"none",      "mirror",  "upside-down", "turn-180",
                                                    "transpose", "turn-90", "turn-270",    "anti-transpose"};
  return t >= 0 && t < kDihedralCount ? names[t] : "none";
}

}  // namespace tamis
