# Test-only LD_PRELOAD shim for the libserialport-over-pty end-to-end test
# (tests/integration/drivers_serial_test.cpp). See serial_pty_shim.cpp.
add_library(junco_serial_pty_shim MODULE ${CMAKE_CURRENT_LIST_DIR}/serial_pty_shim.cpp)
target_link_libraries(junco_serial_pty_shim PRIVATE ${CMAKE_DL_LIBS} junco_warnings)
set_target_properties(junco_serial_pty_shim PROPERTIES
  LIBRARY_OUTPUT_DIRECTORY ${CMAKE_BINARY_DIR}/tests/support)
# tests/CMakeLists.txt includes this file after it has made the test programs
# and named the one that holds each test file.
if(JUNCO_TEST_BINARY_OF_integration_drivers_serial_test)
  add_dependencies(${JUNCO_TEST_BINARY_OF_integration_drivers_serial_test} junco_serial_pty_shim)
endif()
