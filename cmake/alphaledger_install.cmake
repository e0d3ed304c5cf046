# Installation: public headers, the generated version header, the four static libraries, the
# alphaledger executable, an exported CMake package (alphaledger::core, ::harness, ::store,
# ::service) and alphaledger.pc for pkg-config. Included from the top-level CMakeLists.txt.
include(GNUInstallDirs)
include(CMakePackageConfigHelpers)

set(ALPHALEDGER_CMAKE_DIR "${CMAKE_INSTALL_LIBDIR}/cmake/alphaledger")

foreach(part core harness store service)
  set_target_properties(alphaledger_${part} PROPERTIES EXPORT_NAME ${part})
endforeach()

install(TARGETS alphaledger_core alphaledger_harness alphaledger_store alphaledger_service
  EXPORT alphaledgerTargets
  ARCHIVE DESTINATION "${CMAKE_INSTALL_LIBDIR}"
  INCLUDES DESTINATION "${CMAKE_INSTALL_INCLUDEDIR}")
install(TARGETS alphaledger RUNTIME DESTINATION "${CMAKE_INSTALL_BINDIR}")

install(DIRECTORY "${PROJECT_SOURCE_DIR}/include/alphaledger"
  DESTINATION "${CMAKE_INSTALL_INCLUDEDIR}"
  FILES_MATCHING PATTERN "*.hpp")
install(FILES "${PROJECT_BINARY_DIR}/include/alphaledger/version.hpp"
  DESTINATION "${CMAKE_INSTALL_INCLUDEDIR}/alphaledger")

install(EXPORT alphaledgerTargets
  NAMESPACE alphaledger::
  DESTINATION "${ALPHALEDGER_CMAKE_DIR}")
configure_package_config_file(
  "${PROJECT_SOURCE_DIR}/cmake/alphaledgerConfig.cmake.in"
  "${PROJECT_BINARY_DIR}/alphaledgerConfig.cmake"
  INSTALL_DESTINATION "${ALPHALEDGER_CMAKE_DIR}")
# 0.x releases promise nothing across minor versions, so only the same minor version is compatible.
write_basic_package_version_file(
  "${PROJECT_BINARY_DIR}/alphaledgerConfigVersion.cmake"
  COMPATIBILITY SameMinorVersion)
install(FILES
  "${PROJECT_BINARY_DIR}/alphaledgerConfig.cmake"
  "${PROJECT_BINARY_DIR}/alphaledgerConfigVersion.cmake"
  "${PROJECT_SOURCE_DIR}/cmake/alphaledger_httplib.cmake"
  DESTINATION "${ALPHALEDGER_CMAKE_DIR}")

# pkg-config: paths relative to the .pc file, so `cmake --install --prefix P` anywhere works.
set(pc_dir "${CMAKE_INSTALL_LIBDIR}/pkgconfig")
if(IS_ABSOLUTE "${CMAKE_INSTALL_LIBDIR}" OR IS_ABSOLUTE "${CMAKE_INSTALL_INCLUDEDIR}")
  message(FATAL_ERROR "alphaledger.pc needs relative CMAKE_INSTALL_LIBDIR and CMAKE_INSTALL_INCLUDEDIR")
endif()
file(RELATIVE_PATH ALPHALEDGER_PC_PREFIX_FROM_PCDIR "/prefix/${pc_dir}" "/prefix")
string(REGEX REPLACE "/$" "" ALPHALEDGER_PC_PREFIX_FROM_PCDIR "${ALPHALEDGER_PC_PREFIX_FROM_PCDIR}")
set(ALPHALEDGER_PC_INCLUDEDIR "\${prefix}/${CMAKE_INSTALL_INCLUDEDIR}")
set(ALPHALEDGER_PC_LIBDIR "\${prefix}/${CMAKE_INSTALL_LIBDIR}")
configure_file("${PROJECT_SOURCE_DIR}/cmake/alphaledger.pc.in" "${PROJECT_BINARY_DIR}/alphaledger.pc" @ONLY)
install(FILES "${PROJECT_BINARY_DIR}/alphaledger.pc" DESTINATION "${pc_dir}")
