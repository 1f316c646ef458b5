#include "tamis/base/errors.h"

#include <filesystem>
#include <new>

namespace tamis {

namespace {

constexpr std::string_view kJsonTag = "[json.exception.";

// "parse error at line 1, column 1: syntax error while parsing value - invalid
// literal; last read: 'p'" -> "line 1, column 1: invalid literal".
std::string parse_error_text(std::string_view rest) {
  std::string place, reason(rest);
  const size_t at = rest.find(" at ");
  const size_t colon = rest.find(": ");
  if (at != std::string_view::npos && colon != std::string_view::npos && at < colon) {
    place = std::string(rest.substr(at + 4, colon - at - 4));
    reason = std::string(rest.substr(colon + 2));
  }
  // The parser's reason: "syntax error while parsing value - invalid literal; last read: 'p'".
  if (const size_t dash = reason.find(" - "); dash != std::string::npos) reason = reason.substr(dash + 3);
  if (const size_t last = reason.find("; last read"); last != std::string::npos) reason.resize(last);
  if (reason.empty()) reason = "syntax error";
  return "not valid JSON (" + (place.empty() ? std::string() : place + ": ") + reason + ")";
}

}  // namespace

std::string json_error_text(std::string_view what) {
  if (what.substr(0, kJsonTag.size()) != kJsonTag) return std::string(what);
  const size_t close = what.find("] ");
  const std::string_view tag = what.substr(0, close == std::string_view::npos ? what.size() : close);
  const std::string_view rest = close == std::string_view::npos ? std::string_view() : what.substr(close + 2);
  if (tag.find("parse_error") != std::string_view::npos) return parse_error_text(rest);
  if (tag.find("out_of_range.406") != std::string_view::npos) return "not valid JSON (a number out of range)";
  return std::string(rest.empty() ? std::string_view("malformed JSON") : rest);
}

std::string plain_message(const std::exception& e) {
  if (const auto* fe = dynamic_cast<const std::filesystem::filesystem_error*>(&e)) {
    // what(): "filesystem error: cannot create directories: Not a directory [p]".
    std::string_view what = fe->what();
    constexpr std::string_view kTag = "filesystem error: ";
    if (what.substr(0, kTag.size()) == kTag) what.remove_prefix(kTag.size());
    std::string doing(what.substr(0, what.find(": ")));
    if (doing.empty() || doing.size() == what.size()) doing = "cannot use";
    std::string out = doing;
    if (!fe->path1().empty()) out += " " + fe->path1().string();
    if (!fe->path2().empty()) out += " and " + fe->path2().string();
    return out + ": " + fe->code().message();
  }
  if (dynamic_cast<const std::bad_alloc*>(&e)) return "out of memory";
  const std::string_view what = e.what();
  if (what.substr(0, kJsonTag.size()) == kJsonTag) return json_error_text(what);
  return std::string(what);
}

}  // namespace tamis
