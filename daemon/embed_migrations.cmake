# Build-time step: writes a header embedding every NNNN_*.sql of SRC_DIR
# as a raw string, in file-name order. Invoked with -DSRC_DIR=... -DOUT=...
# and optionally -DNS=... (the namespace inside junco::; default daemon::embedded,
# lab/ embeds schema/pg as lab::embedded_pg).
if(NOT NS)
  set(NS daemon::embedded)
endif()
file(GLOB files ${SRC_DIR}/[0-9][0-9][0-9][0-9]_*.sql)
list(SORT files)
set(body "// Generated from ${SRC_DIR} by daemon/embed_migrations.cmake; do not edit.\n#pragma once\n#include <array>\n#include <string_view>\nnamespace junco::${NS} {\nstruct MigrationText { int version; std::string_view name; std::string_view sql; };\ninline constexpr std::array<MigrationText, ")
list(LENGTH files count)
string(APPEND body "${count}> migrations{{\n")
foreach(f ${files})
  get_filename_component(name ${f} NAME)
  string(SUBSTRING ${name} 0 4 version)
  math(EXPR version "1${version} - 10000")
  file(READ ${f} sql)
  string(APPEND body "  {${version}, \"${name}\", R\"junco_sql(${sql})junco_sql\"},\n")
endforeach()
string(APPEND body "}};\n}  // namespace junco::${NS}\n")
file(WRITE ${OUT}.tmp "${body}")
file(COPY_FILE ${OUT}.tmp ${OUT} ONLY_IF_DIFFERENT)
