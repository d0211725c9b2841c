# Build-time step (cmake -P): writes OUTPUT from TEMPLATE with ECHOLINE_COMMIT set to
#   COMMIT_OVERRIDE when given, else "g" + `git describe --always --dirty` of SOURCE_DIR (the
#   abbreviated commit, "-dirty" when the working tree has uncommitted changes), else "unknown".
# configure_file rewrites OUTPUT only when the text changes, so an unchanged commit rebuilds nothing.
set(ECHOLINE_COMMIT "unknown")
if(COMMIT_OVERRIDE)
  if(NOT COMMIT_OVERRIDE MATCHES "^[A-Za-z0-9._+-]+$")
    message(FATAL_ERROR "ECHOLINE_COMMIT \"${COMMIT_OVERRIDE}\": use letters, digits and . _ + - only")
  endif()
  set(ECHOLINE_COMMIT "${COMMIT_OVERRIDE}")
elseif(EXISTS "${SOURCE_DIR}/.git")
  find_package(Git QUIET)
  if(GIT_FOUND)
    # --exclude=*: no tag names, only the commit (the release number comes from CMake).
    execute_process(COMMAND "${GIT_EXECUTABLE}" describe --always --dirty --abbrev=7 --exclude=*
                    WORKING_DIRECTORY "${SOURCE_DIR}"
                    RESULT_VARIABLE rc OUTPUT_VARIABLE described ERROR_QUIET OUTPUT_STRIP_TRAILING_WHITESPACE)
    if(rc EQUAL 0 AND described MATCHES "^[0-9a-f]+(-dirty)?$")
      set(ECHOLINE_COMMIT "g${described}")
    endif()
  endif()
endif()
configure_file("${TEMPLATE}" "${OUTPUT}" @ONLY)
