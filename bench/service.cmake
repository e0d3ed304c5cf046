# The service's load benchmark (bench/load_http.cpp); included by bench/CMakeLists.txt.
# It drives the built `alphaledger serve` over loopback HTTP.
add_executable(load_http ${CMAKE_CURRENT_LIST_DIR}/load_http.cpp)
target_link_libraries(load_http PRIVATE alphaledger::service alphaledger::cpp_httplib)
target_compile_definitions(load_http PRIVATE ALPHALEDGER_BINARY="$<TARGET_FILE:alphaledger>")
add_dependencies(load_http alphaledger)
