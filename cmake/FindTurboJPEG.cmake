# Finds the TurboJPEG API of libjpeg-turbo (Debian: libturbojpeg0-dev) and defines
# the imported target TurboJPEG::TurboJPEG.
find_package(PkgConfig QUIET)
if(PkgConfig_FOUND)
  pkg_check_modules(PC_TurboJPEG QUIET libturbojpeg)
endif()
find_path(TurboJPEG_INCLUDE_DIR turbojpeg.h HINTS ${PC_TurboJPEG_INCLUDE_DIRS})
find_library(TurboJPEG_LIBRARY NAMES turbojpeg HINTS ${PC_TurboJPEG_LIBRARY_DIRS})
include(FindPackageHandleStandardArgs)
find_package_handle_standard_args(TurboJPEG REQUIRED_VARS TurboJPEG_LIBRARY TurboJPEG_INCLUDE_DIR)
if(TurboJPEG_FOUND AND NOT TARGET TurboJPEG::TurboJPEG)
  add_library(TurboJPEG::TurboJPEG UNKNOWN IMPORTED)
  set_target_properties(TurboJPEG::TurboJPEG PROPERTIES
    IMPORTED_LOCATION "${TurboJPEG_LIBRARY}"
    INTERFACE_INCLUDE_DIRECTORIES "${TurboJPEG_INCLUDE_DIR}")
endif()
