# The header_examples test: builds the extracted examples (a compile error in an example fails
# here), then runs the runnable ones. Usage: cmake -D BUILD_DIR=... -D EXE=... -P build_and_run.cmake
execute_process(COMMAND ${CMAKE_COMMAND} --build ${BUILD_DIR} --target header_examples
                RESULT_VARIABLE built)
if(NOT built EQUAL 0)
  message(FATAL_ERROR "the header examples do not compile (errors above name the header and line)")
endif()
execute_process(COMMAND ${EXE} RESULT_VARIABLE ran)
if(NOT ran EQUAL 0)
  message(FATAL_ERROR "a header example failed when run (see above)")
endif()
