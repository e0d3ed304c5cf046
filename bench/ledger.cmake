# The ledger's benchmark (bench/ledger_bench.cpp); included by bench/CMakeLists.txt.
add_executable(ledger_bench ${CMAKE_CURRENT_LIST_DIR}/ledger_bench.cpp)
target_link_libraries(ledger_bench PRIVATE alphaledger::store)
