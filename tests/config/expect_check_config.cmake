# cmake -DNIGHTJAR=... -DCONFIG=... -DEXPECT_EXIT=N -DEXPECT_STDERR=text -DEXPECT_ERRORS=N -P this
# Runs `nightjar check-config CONFIG` and fails unless it exits with EXPECT_EXIT, its stderr
# contains EXPECT_STDERR (plain text, not a regex) and holds EXPECT_ERRORS error lines.
execute_process(COMMAND ${NIGHTJAR} check-config ${CONFIG}
                RESULT_VARIABLE exit_code OUTPUT_VARIABLE out ERROR_VARIABLE err)
message("exit ${exit_code}\nstdout:\n${out}\nstderr:\n${err}")
if(NOT exit_code STREQUAL EXPECT_EXIT)
  message(FATAL_ERROR "expected exit code ${EXPECT_EXIT}, got ${exit_code}")
endif()
string(FIND "${err}" "${EXPECT_STDERR}" at)
if(at EQUAL -1)
  message(FATAL_ERROR "stderr lacks: ${EXPECT_STDERR}")
endif()
if(DEFINED EXPECT_ERRORS)
  # Error lines look like FILE:LINE:COL: ...; the closing summary line has no LINE:COL.
  # (';' separates CMake list items, and messages contain it: take it out before counting.)
  string(REPLACE ";" "," err_lines "${err}")
  string(REGEX MATCHALL "[^\n]*:[0-9]+:[0-9]+: [^\n]*" lines "${err_lines}")
  list(LENGTH lines count)
  if(NOT count EQUAL EXPECT_ERRORS)
    message(FATAL_ERROR "expected ${EXPECT_ERRORS} error lines on stderr, got ${count}")
  endif()
endif()
