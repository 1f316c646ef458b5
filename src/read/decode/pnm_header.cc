#include "tamis/read/decode/pnm_header.h"

#include <cctype>
#include <optional>
#include <string>

namespace tamis {

namespace {

struct PnmCursor {
  std::span<const uint8_t> b;
  size_t off;
  void skip_space() {
    while (off < b.size()) {
      if (b[off] == '#') {
        while (off < b.size() && b[off] != '\n' && b[off] != '\r') ++off;
      } else if (std::isspace(b[off])) {
        ++off;
      } else {
        break;
      }
    }
  }
  std::optional<uint64_t> number() {
    skip_space();
    uint64_t v = 0;
    size_t start = off;
    while (off < b.size() && std::isdigit(b[off]) && off - start < 10) v = v * 10 + (b[off++] - '0');
    if (off == start) return std::nullopt;
    return v;
  }
  std::string word() {
    skip_space();
    std::string w;
    while (off < b.size() && !std::isspace(b[off]) && w.size() < 32) w.push_back(static_cast<char>(b[off++]));
    return w;
  }
};

}  // namespace

PnmHeader read_pnm_header(std::span<const uint8_t> b) {
  PnmHeader h;
  if (b.size() < 3 || b[0] != 'P' || b[1] < '1' || b[1] > '7') return h;
  h.kind = static_cast<char>(b[1]);
  PnmCursor c{b, 2};
  if (h.kind == '7') {
    bool ended = false;
    for (int fields = 0; fields < 64 && c.off < b.size(); ++fields) {
      std::string key = c.word();
      if (key == "ENDHDR") {
        ended = true;
        break;
      }
      if (key == "TUPLTYPE") {
        c.word();
        continue;
      }
      auto v = c.number();
      if (!v) break;
      if (key == "WIDTH") h.width = *v;
      else if (key == "HEIGHT") h.height = *v;
      else if (key == "DEPTH") h.depth = *v;
      else if (key == "MAXVAL") h.maxval = *v;
    }
    if (!ended) {
      h.status = c.off >= b.size() ? PnmHeader::Status::truncated : PnmHeader::Status::bad;
      return h;
    }
    // ENDHDR is followed by one newline.
    if (c.off < b.size() && b[c.off] == '\n') ++c.off;
  } else {
    auto vw = c.number(), vh = c.number();
    if (!vw || !vh) {
      h.status = PnmHeader::Status::truncated;
      return h;
    }
    h.width = *vw;
    h.height = *vh;
    if (h.kind != '1' && h.kind != '4') {
      auto vm = c.number();
      if (!vm) {
        h.status = PnmHeader::Status::truncated;
        return h;
      }
      h.maxval = *vm;
    }
    if (h.kind == '3' || h.kind == '6') h.depth = 3;
    if (c.off < b.size()) ++c.off;  // the single whitespace before binary data
  }
  h.data_at = c.off;
  h.status = PnmHeader::Status::ok;
  return h;
}

}  // namespace tamis
