# Runs a reference generator into OUT and fails unless OUT equals EXPECTED byte for byte.
# -DPYTHON=... -DSCRIPT=... -DOUT=... -DEXPECTED=...
execute_process(COMMAND ${PYTHON} ${SCRIPT} --out ${OUT} RESULT_VARIABLE result)
if(NOT result EQUAL 0)
  message(FATAL_ERROR "${SCRIPT} failed (${result})")
endif()
execute_process(COMMAND ${CMAKE_COMMAND} -E compare_files ${OUT} ${EXPECTED}
                RESULT_VARIABLE differs)
if(NOT differs EQUAL 0)
  message(FATAL_ERROR "${EXPECTED} is not what ${SCRIPT} gives now (see ${OUT})")
endif()
