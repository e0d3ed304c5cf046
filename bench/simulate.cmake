# simulate's benchmark (bench/simulate_bench.cpp); included by bench/CMakeLists.txt.
add_executable(simulate_bench ${CMAKE_CURRENT_LIST_DIR}/simulate_bench.cpp)
target_link_libraries(simulate_bench PRIVATE alphaledger::harness)
