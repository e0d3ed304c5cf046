# The PostgreSQL backend's load benchmark (bench/pg_load.cpp, run by bench/pg_bench.sh); included by
# bench/CMakeLists.txt. It drives the built `alphaledger serve` over loopback HTTP.
add_executable(pg_load ${CMAKE_CURRENT_LIST_DIR}/pg_load.cpp)
target_link_libraries(pg_load PRIVATE nlohmann_json::nlohmann_json alphaledger::cpp_httplib Threads::Threads)
target_compile_definitions(pg_load PRIVATE ALPHALEDGER_BINARY="$<TARGET_FILE:alphaledger>")
add_dependencies(pg_load alphaledger)
