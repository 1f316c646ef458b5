// One FileRecord as a JSON array (for CBOR): shared by the saved index and the
// cache, so both store exactly the same fields. Decoding checks every type and
// enum range and throws std::runtime_error (or a json exception) on bad input.
#pragma once

#include <nlohmann/json.hpp>

#include "tamis/record.h"

namespace tamis::detail {

// `with_lookalike`: also the 8 DCT hashes and the 32x32 thumbnail (the cache
// needs them to skip decoding; the index keeps only the groups they produced).
nlohmann::json record_to_json(const FileRecord& r, bool with_lookalike);
FileRecord record_from_json(const nlohmann::json& e);

}  // namespace tamis::detail
