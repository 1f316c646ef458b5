// The saved index: everything an audit read (AuditIndex: records, labels, groups,
// settings), so `tamis split` can re-check and re-split without reading an image.
//
// Format: CBOR (RFC 8949) of one map {"format": "tamis-index", "version": 1, ...};
// strings that come from the data set (paths, labels, messages) are stored as
// CBOR byte strings, so any file-name bytes survive. Look-alike thumbnails are not
// stored: the groups they produced are. Findings are not stored: checks re-run
// from the records. Loading checks the format and version
// and every index it follows; a damaged or foreign file throws
// std::runtime_error, never yields a half-read index.
#pragma once

#include <filesystem>

#include "tamis/pipeline/audit.h"

namespace tamis {

class StagedFiles;

inline constexpr int kIndexVersion = 5;  // 2: thumbnails of 1,152 bytes (gray 32x32, then 8x8 chroma); 3: a checksum; 4: thumbnails of 3,072 bytes (32x32 chroma); 5: records carry the JPEG quality
inline constexpr size_t kMaskPairsShown = 12;  // image/mask pairs whose thumbnails the index keeps for the report
inline constexpr const char* kIndexFileName = "index.cbor";

// With `staged`, the file is written under a temporary name and put in place by
// staged->commit() (atomic_file.h); without, at once. `labels`, when given, are
// saved instead of index.labels: the labels as read, where a class map changed
// the run's (class_map.h), so that a re-split chooses its classes again.
void save_index(const std::filesystem::path& file, const AuditIndex& index, StagedFiles* staged = nullptr,
                const Labelling* labels = nullptr);
AuditIndex load_index(const std::filesystem::path& file);

}  // namespace tamis
