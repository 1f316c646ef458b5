# Finds xxHash (Debian: libxxhash-dev) and defines the imported target XXHash::XXHash.
find_path(XXHash_INCLUDE_DIR xxhash.h)
find_library(XXHash_LIBRARY NAMES xxhash)
include(FindPackageHandleStandardArgs)
find_package_handle_standard_args(XXHash REQUIRED_VARS XXHash_LIBRARY XXHash_INCLUDE_DIR)
if(XXHash_FOUND AND NOT TARGET XXHash::XXHash)
  add_library(XXHash::XXHash UNKNOWN IMPORTED)
  set_target_properties(XXHash::XXHash PROPERTIES
    IMPORTED_LOCATION "${XXHash_LIBRARY}"
    INTERFACE_INCLUDE_DIRECTORIES "${XXHash_INCLUDE_DIR}")
endif()
