// Reading a file of the data set: the one discipline every reader of ROOT's
// files keeps (the read stage, report previews).
//
// open_data_file: read-only, never through a symbolic link in the last
// component, without blocking (whatever replaced the file since it was listed
// fails the read: a folder refuses it, a FIFO has no data, a device gives too
// much). read_whole: the whole open file, exactly `expect` bytes (one more is
// asked for, so a file that grew shows it; a short read of a regular file is its
// end); false on any error or another length. read_data_file: both, for a
// regular file of at most `max_bytes`, its size taken from the descriptor.
#pragma once

#include <cstdint>
#include <string>
#include <vector>

namespace tamis {

// `rel` is relative to the folder open as `dirfd` (AT_FDCWD: the working folder,
// or an absolute path). Returns the descriptor, or -1.
int open_data_file(int dirfd, const std::string& rel);
bool read_whole(int fd, uint64_t expect, std::vector<uint8_t>& buf);
bool read_data_file(int dirfd, const std::string& rel, uint64_t max_bytes, std::vector<uint8_t>& buf);

}  // namespace tamis
