// Plain sentences for errors that come from libraries. A message the user reads
// names what tamis was doing and why it failed, never a library's exception
// text ("filesystem error: ...", "[json.exception.parse_error.101] ...").
//
// plain_message(e): for std::filesystem::filesystem_error, "cannot <what> <path>:
// <the system's reason>"; for nlohmann::json's exceptions (recognised by their
// "[json.exception." prefix, so base needs no JSON header), json_error_text;
// for std::bad_alloc, "out of memory"; anything else (tamis's own errors) as it is.
// json_error_text(what): "not valid JSON (line L, column C: <reason>)" for a
// parse error, else the reason without the library's tag. Pure; thread-safe.
#pragma once

#include <exception>
#include <string>
#include <string_view>

namespace tamis {

std::string plain_message(const std::exception& e);
std::string json_error_text(std::string_view what);

}  // namespace tamis
