# Included from tests/CMakeLists.txt: exit codes of the `nightjar` binary's command line.
# Usage errors exit 2 (common practice for command-line tools, e.g. sysexits' EX_USAGE
# family and GNU tools' "2 for trouble"); --help succeeds with 0.
function(nightjar_cli_exit_test name expect_exit)
  add_test(NAME ${name}
           COMMAND ${CMAKE_COMMAND} -DNIGHTJAR=$<TARGET_FILE:nightjar> "-DARGS=${ARGN}"
                   -DEXPECT_EXIT=${expect_exit}
                   -P ${CMAKE_CURRENT_SOURCE_DIR}/daemon/expect_exit.cmake)
  set_tests_properties(${name} PROPERTIES LABELS cli)
endfunction()

nightjar_cli_exit_test(cli_unknown_flag_exits_2 2 --no-such-flag)
nightjar_cli_exit_test(cli_unknown_subcommand_flag_exits_2 2 replay --no-such-flag)
nightjar_cli_exit_test(cli_bad_flag_value_exits_2 2 replay --jobs notanumber)
nightjar_cli_exit_test(cli_help_exits_0 0 --help)
nightjar_cli_exit_test(cli_replay_help_exits_0 0 replay --help)
