#include "tamis/model/cbor_reader.h"

#include <stdexcept>
#include <string>

#include "tamis/base/errors.h"

namespace tamis {

namespace {

using nlohmann::json;

// The DOM builder of nlohmann::json behind a SAX handler that refuses to open a
// container beyond the depth limit: the reader then unwinds at once.
class BoundedSax final : public json::json_sax_t {
 public:
  BoundedSax(json& result, size_t max_depth) : dom_(result, true), max_depth_(max_depth) {}
  bool null() override { return dom_.null(); }
  bool boolean(bool v) override { return dom_.boolean(v); }
  bool number_integer(number_integer_t v) override { return dom_.number_integer(v); }
  bool number_unsigned(number_unsigned_t v) override { return dom_.number_unsigned(v); }
  bool number_float(number_float_t v, const string_t& s) override { return dom_.number_float(v, s); }
  bool string(string_t& v) override { return dom_.string(v); }
  bool binary(binary_t& v) override { return dom_.binary(v); }
  bool start_object(std::size_t n) override { return deeper() && dom_.start_object(n); }
  bool key(string_t& v) override { return dom_.key(v); }
  bool end_object() override {
    --depth_;
    return dom_.end_object();
  }
  bool start_array(std::size_t n) override { return deeper() && dom_.start_array(n); }
  bool end_array() override {
    --depth_;
    return dom_.end_array();
  }
  bool parse_error(std::size_t at, const std::string& token, const nlohmann::detail::exception& e) override {
    return dom_.parse_error(at, token, e);
  }
  bool too_deep() const { return too_deep_; }

 private:
  bool deeper() {
    if (++depth_ > max_depth_) too_deep_ = true;
    return !too_deep_;
  }
  nlohmann::detail::json_sax_dom_parser<json> dom_;
  size_t max_depth_, depth_ = 0;
  bool too_deep_ = false;
};

}  // namespace

json parse_cbor(const uint8_t* begin, const uint8_t* end, size_t max_depth) {
  json result;
  BoundedSax sax(result, max_depth);
  bool ok = false;
  try {
    ok = json::sax_parse(begin, end, &sax, json::input_format_t::cbor);
  } catch (const json::exception& e) {
    throw std::runtime_error("malformed CBOR: " + json_error_text(e.what()));
  }
  if (sax.too_deep()) throw std::runtime_error("CBOR nested more than " + std::to_string(max_depth) + " levels deep");
  if (!ok) throw std::runtime_error("malformed CBOR");
  return result;
}

}  // namespace tamis
