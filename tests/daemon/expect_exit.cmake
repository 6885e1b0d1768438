# cmake -DNIGHTJAR=... "-DARGS=a;b" -DEXPECT_EXIT=N [-DEXPECT_STDERR=text] -P this
# Runs NIGHTJAR with ARGS and fails unless it exits with EXPECT_EXIT and (if given) its
# stderr contains EXPECT_STDERR (plain text).
execute_process(COMMAND ${NIGHTJAR} ${ARGS}
                RESULT_VARIABLE exit_code OUTPUT_VARIABLE out ERROR_VARIABLE err)
message("exit ${exit_code}\nstdout:\n${out}\nstderr:\n${err}")
if(NOT exit_code STREQUAL EXPECT_EXIT)
  message(FATAL_ERROR "expected exit code ${EXPECT_EXIT}, got ${exit_code}")
endif()
if(DEFINED EXPECT_STDERR)
  string(FIND "${err}" "${EXPECT_STDERR}" at)
  if(at EQUAL -1)
    message(FATAL_ERROR "stderr lacks: ${EXPECT_STDERR}")
  endif()
endif()
