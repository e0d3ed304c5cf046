# A short start for the alphaledger executable (docs/benchmarks.md, "Start-up: the executable's
# link"). A read command spends most of its few milliseconds before main(): the kernel maps the
# program and its shared objects, and the dynamic loader binds every symbol taken from libstdc++,
# spdlog and fmt and patches every address of a position-independent executable. With
# ALPHALEDGER_FAST_START (default ON) the executable, and only it, is linked so that little of that
# is left:
#   - not position-independent (-no-pie): addresses are fixed at link time, no relative relocations;
#   - libstdc++ and libgcc from their static archives: no libstdc++.so / libgcc_s.so to map, and no
#     symbols to bind into them;
#   - spdlog and fmt compiled in from their headers: two shared objects fewer;
#   - the linker drops shared objects nothing uses (--as-needed) and optimises the hash table (-O1).
# The installed libraries and the Python module are not touched: they stay position-independent
# where they were and keep naming their shared dependencies. A packager who must use the shared
# libstdc++ (or a distribution's policy of PIE everywhere) sets -DALPHALEDGER_FAST_START=OFF and
# gets the ordinary link.
#
# alphaledger_fast_start_logging(VAR): sets VAR to the targets the executable links for spdlog.
# alphaledger_fast_start(TARGET): applies the link above to the executable TARGET.

option(ALPHALEDGER_FAST_START
       "Link the alphaledger executable for a short start (non-PIE, static libstdc++/libgcc, spdlog and fmt from headers)"
       ON)

if(ALPHALEDGER_FAST_START)
  include(CheckPIESupported)
  check_pie_supported(OUTPUT_VARIABLE _alphaledger_pie_output LANGUAGES CXX)
  if(NOT CMAKE_CXX_LINK_NO_PIE_SUPPORTED)
    message(STATUS "ALPHALEDGER_FAST_START: the linker cannot make a non-PIE executable; the executable stays PIE")
  endif()
endif()

function(alphaledger_fast_start_logging out_var)
  if(NOT ALPHALEDGER_FAST_START)
    set(${out_var} spdlog::spdlog PARENT_SCOPE)
    return()
  endif()
  # Debian's spdlog package exports spdlog::spdlog_header_only, but it links the shared fmt
  # (fmt::fmt); fmt's package exports fmt::fmt-header-only. The executable takes spdlog's header
  # form with fmt's header form, so that neither libspdlog.so nor libfmt.so is needed.
  if(TARGET spdlog::spdlog_header_only AND TARGET fmt::fmt-header-only)
    if(NOT TARGET alphaledger_spdlog_headers)
      get_target_property(_defs spdlog::spdlog_header_only INTERFACE_COMPILE_DEFINITIONS)
      get_target_property(_dirs spdlog::spdlog_header_only INTERFACE_INCLUDE_DIRECTORIES)
      add_library(alphaledger_spdlog_headers INTERFACE)
      if(_defs)
        target_compile_definitions(alphaledger_spdlog_headers INTERFACE ${_defs})
      endif()
      if(_dirs)
        target_include_directories(alphaledger_spdlog_headers SYSTEM INTERFACE ${_dirs})
      endif()
      target_link_libraries(alphaledger_spdlog_headers INTERFACE fmt::fmt-header-only Threads::Threads)
    endif()
    set(${out_var} alphaledger_spdlog_headers PARENT_SCOPE)
  else()
    message(STATUS "ALPHALEDGER_FAST_START: no header-only spdlog/fmt targets; the shared libraries are used")
    set(${out_var} spdlog::spdlog PARENT_SCOPE)
  endif()
endfunction()

function(alphaledger_fast_start target)
  if(NOT ALPHALEDGER_FAST_START)
    return()
  endif()
  if(CMAKE_CXX_LINK_NO_PIE_SUPPORTED)
    # With policy CMP0083 (NEW since CMake 3.14), OFF makes CMake link with -no-pie. The
    # executable's own objects are compiled without PIE too; the libraries it links keep their
    # flags (a PIC or PIE object links into a non-PIE executable as it is).
    set_target_properties(${target} PROPERTIES POSITION_INDEPENDENT_CODE OFF)
    if(CMAKE_CXX_COMPILER_ID STREQUAL "GNU" OR CMAKE_CXX_COMPILER_ID MATCHES "Clang")
      target_compile_options(${target} PRIVATE -fno-pie)
    endif()
  endif()
  if(CMAKE_CXX_COMPILER_ID STREQUAL "GNU")
    target_link_options(${target} PRIVATE -static-libstdc++ -static-libgcc)
  endif()
  target_link_options(${target} PRIVATE LINKER:-O1 LINKER:--as-needed LINKER:--hash-style=gnu)
endfunction()
