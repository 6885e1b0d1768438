# Included from tests/CMakeLists.txt: the config module's gtest suite and the ctests that run
# `nightjar check-config` on the example file and on a broken one.
nightjar_add_test_suite(config nightjar::config)
target_compile_definitions(config_tests PRIVATE NIGHTJAR_SOURCE_DIR="${PROJECT_SOURCE_DIR}")

add_test(NAME check_config_example
         COMMAND nightjar check-config ${PROJECT_SOURCE_DIR}/config/nightjar.yaml)
set_tests_properties(check_config_example PROPERTIES LABELS config)

# A broken file must exit 1 and name the key: the script asserts the exit code, the error
# line on stderr and the number of errors (ctest's PASS_REGULAR_EXPRESSION would ignore the
# exit code).
add_test(NAME check_config_rejects_bad_file
         COMMAND ${CMAKE_COMMAND}
                 -DNIGHTJAR=$<TARGET_FILE:nightjar>
                 -DCONFIG=${CMAKE_CURRENT_SOURCE_DIR}/config/data/unknown_key.yaml
                 -DEXPECT_EXIT=1
                 "-DEXPECT_STDERR=unknown_key.yaml:9:29: channels[0].sensor.max_valeu: unknown key; did you mean 'max_value'?"
                 -DEXPECT_ERRORS=3
                 -P ${CMAKE_CURRENT_SOURCE_DIR}/config/expect_check_config.cmake)
set_tests_properties(check_config_rejects_bad_file PROPERTIES LABELS config)
