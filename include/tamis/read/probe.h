// The header probe: format, geometry and storage facts from a file's bytes,
// without decoding pixels.
//
// Recognises PNG (incl. APNG), JPEG, GIF, BMP, WebP, TIFF and PNM/PAM by their
// magic bytes, whatever the file is called, and reads width, height, stored
// colour mode, bits per sample, interlace/progressive, frame count, EXIF
// orientation and whether EXIF GPS position tags are present (JPEG APP1, PNG
// eXIf, WebP EXIF, TIFF IFD0).
//
// It also checks the container's integrity where that costs no decoding: every
// PNG chunk's CRC and the IEND chunk, the JPEG marker chain up to its EOI, the
// GIF block chain up to its trailer, the BMP/PNM pixel-data length and the WebP
// RIFF length. A failing check gives a Defect; the facts read up to that point
// are kept.
//
// Every parser is bounds-checked: any byte sequence is safe to pass. Pure
// function of its input; thread-safe.
#pragma once

#include <cstdint>
#include <span>
#include <string_view>

#include "tamis/model/record.h"

namespace tamis {

struct ProbeOutcome {
  ProbeInfo info;
  Defect defect = Defect::none;  // unknown_format, bad_header, truncated or bad_checksum
};

ProbeOutcome probe_bytes(std::span<const uint8_t> bytes);

// Format named by the file's extension (case-insensitive), or unknown.
Format format_from_extension(std::string_view path);

// True for extensions of image formats tamis does not decode (HEIC, AVIF, JPEG XL,
// camera raw, ...): such files are counted as unreadable, not ignored.
bool has_other_image_extension(std::string_view path);

}  // namespace tamis
