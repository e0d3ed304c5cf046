# Finds Debian's cpp-httplib and wraps it in the imported target alphaledger::cpp_httplib.
# Used by the build tree and, installed next to alphaledgerConfig.cmake, by projects that link the
# installed service library (a static library needs its private dependencies at link time).
#
# Debian ships cpp-httplib split: declarations in httplib.h, code in libcpp-httplib.so, built with
# OpenSSL support. Every file that includes httplib.h must see the same CPPHTTPLIB_OPENSSL_SUPPORT
# define as that build, or Request/Client change layout. Sets ALPHALEDGER_HTTPLIB_FOUND.
if(TARGET alphaledger::cpp_httplib)
  set(ALPHALEDGER_HTTPLIB_FOUND TRUE)
  return()
endif()
find_path(HTTPLIB_INCLUDE_DIR httplib.h)
find_library(HTTPLIB_LIBRARY cpp-httplib)
if(HTTPLIB_INCLUDE_DIR AND HTTPLIB_LIBRARY)
  add_library(alphaledger::cpp_httplib UNKNOWN IMPORTED)
  set_target_properties(alphaledger::cpp_httplib PROPERTIES
    IMPORTED_LOCATION "${HTTPLIB_LIBRARY}"
    INTERFACE_INCLUDE_DIRECTORIES "${HTTPLIB_INCLUDE_DIR}"
    INTERFACE_COMPILE_DEFINITIONS CPPHTTPLIB_OPENSSL_SUPPORT)
  set(ALPHALEDGER_HTTPLIB_FOUND TRUE)
else()
  set(ALPHALEDGER_HTTPLIB_FOUND FALSE)
endif()
