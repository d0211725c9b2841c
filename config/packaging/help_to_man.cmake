# Build-time step (cmake -P): turns a program's own --help text into a man page, so the manual
# and the program never disagree. Inputs:
#   PROGRAM   the built binary;  NAME  its installed name;  SUMMARY  one line for NAME
#   SUBCOMMANDS  (optional, comma-separated) subcommands whose "<NAME> <sub> --help" is appended
#   OUTPUT    the page to write, e.g. .../echolined.1.gz (gzip-compressed when it ends in .gz)
foreach(required PROGRAM NAME SUMMARY OUTPUT)
  if(NOT DEFINED ${required})
    message(FATAL_ERROR "help_to_man.cmake: ${required} not given")
  endif()
endforeach()

# Runs PROGRAM with the arguments; the text it printed (stdout) lands in `out_var`.
function(program_text out_var)
  execute_process(COMMAND "${PROGRAM}" ${ARGN} OUTPUT_VARIABLE text ERROR_VARIABLE err RESULT_VARIABLE rc)
  if(NOT rc EQUAL 0)
    message(FATAL_ERROR "help_to_man.cmake: ${PROGRAM} ${ARGN} exited with ${rc}: ${err}")
  endif()
  set(${out_var} "${text}" PARENT_SCOPE)
endfunction()

# Help text as a roff no-fill block: backslashes escaped, control characters at line starts
# neutralised.
function(roff_block out_var text)
  string(REPLACE "\\" "\\e" text "${text}")
  string(REGEX REPLACE "(^|\n)([.'])" "\\1\\\\&\\2" text "${text}")
  set(${out_var} ".nf\n${text}.fi\n" PARENT_SCOPE)
endfunction()

program_text(version_line --version)
string(STRIP "${version_line}" version_line)
program_text(help --help)
string(TOUPPER "${NAME}" title)
roff_block(body "${help}")
set(page ".TH \"${title}\" 1 \"\" \"${version_line}\" \"Echoline\"\n")
string(APPEND page ".SH NAME\n${NAME} \\- ${SUMMARY}\n")
string(APPEND page ".SH DESCRIPTION\nThe text below is what \\fB${NAME} --help\\fR prints.\n.PP\n${body}")
if(SUBCOMMANDS)
  string(REPLACE "," ";" subcommands "${SUBCOMMANDS}")
  string(APPEND page ".SH COMMANDS\n")
  foreach(sub IN LISTS subcommands)
    program_text(sub_help ${sub} --help)
    roff_block(sub_body "${sub_help}")
    string(APPEND page ".SS \"${NAME} ${sub}\"\n${sub_body}")
  endforeach()
endif()
string(APPEND page ".SH \"SEE ALSO\"\n\\fBecholine\\fR(1), \\fBecholined\\fR(1), \\fBecholine-sim\\fR(1); the README and the\n"
                   "configuration reference in the package's documentation folder.\n")

if(OUTPUT MATCHES "\\.gz$")
  string(REGEX REPLACE "\\.gz$" "" plain "${OUTPUT}")
  file(WRITE "${plain}" "${page}")
  file(ARCHIVE_CREATE OUTPUT "${OUTPUT}" PATHS "${plain}" FORMAT raw COMPRESSION GZip COMPRESSION_LEVEL 9)
else()
  file(WRITE "${OUTPUT}" "${page}")
endif()
