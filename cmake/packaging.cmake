# Installing junco as a Linux service, and its Debian package (`cpack -G DEB`
# in a build tree; DEVELOPERS.md "Packaging"). The programs, dialects, schemas,
# systemd unit and Python client have their install rules beside their
# sources; this file adds what only an installed system needs: man pages,
# bash completion, docs and examples, the service's user (sysusers.d), its
# directories (tmpfiles.d) and its config /etc/junco/bench.jsonc.
#
# Paths are baked in at configure time (the unit's ExecStart, the installed
# dialect directory juncod searches), so the package installs under
# CMAKE_INSTALL_PREFIX; the default preset sets it to /usr, where a Debian
# package belongs and where the unit reads /etc/junco/bench.jsonc.

# Man pages (roff sources in tools/man), compressed as Debian policy asks.
find_program(JUNCO_GZIP gzip REQUIRED)
foreach(page junco.1 junco-sim.1 juncod.8)
  string(REGEX MATCH "[0-9]$" section ${page})
  set(out ${PROJECT_BINARY_DIR}/man/${page}.gz)
  add_custom_command(OUTPUT ${out}
    COMMAND ${CMAKE_COMMAND} -E make_directory ${PROJECT_BINARY_DIR}/man
    COMMAND ${JUNCO_GZIP} -9 -n -c ${PROJECT_SOURCE_DIR}/tools/man/${page} > ${out}
    DEPENDS ${PROJECT_SOURCE_DIR}/tools/man/${page}
    COMMENT "Compressing man page ${page}")
  list(APPEND JUNCO_MAN_PAGES ${out})
  install(FILES ${out} DESTINATION ${CMAKE_INSTALL_MANDIR}/man${section})
endforeach()
add_custom_target(junco_man_pages ALL DEPENDS ${JUNCO_MAN_PAGES})

# Bash completion, found by bash-completion's loader under the command's name.
install(FILES ${PROJECT_SOURCE_DIR}/tools/completion/junco.bash
        DESTINATION ${CMAKE_INSTALL_DATADIR}/bash-completion/completions RENAME junco)

# Docs and examples → share/doc/junco (bench.example.jsonc: daemon/CMakeLists.txt).
install(FILES README.md DEVELOPERS.md DESTINATION ${CMAKE_INSTALL_DOCDIR})
install(FILES LICENSE DESTINATION ${CMAKE_INSTALL_DOCDIR} RENAME copyright)
file(GLOB JUNCO_DOC_PAGES CONFIGURE_DEPENDS ${PROJECT_SOURCE_DIR}/docs/*.md)
install(FILES ${JUNCO_DOC_PAGES} DESTINATION ${CMAKE_INSTALL_DOCDIR}/docs)
install(DIRECTORY tools/examples/ DESTINATION ${CMAKE_INSTALL_DOCDIR}/examples)

# The service: its user and group, its directories, its config (a conffile in
# the package: edits survive upgrades). The unit itself: daemon/CMakeLists.txt.
install(FILES tools/systemd/junco.sysusers DESTINATION lib/sysusers.d RENAME junco.conf)
install(FILES tools/systemd/junco.tmpfiles DESTINATION lib/tmpfiles.d RENAME junco.conf)
install(FILES tools/examples/bench.jsonc DESTINATION ${CMAKE_INSTALL_FULL_SYSCONFDIR}/junco)

# --- Debian package -----------------------------------------------------------
set(CPACK_GENERATOR DEB)
set(CPACK_PACKAGE_NAME junco)
set(CPACK_PACKAGE_VERSION ${PROJECT_VERSION})
set(CPACK_PACKAGE_VENDOR "The junco developers")
set(CPACK_PACKAGE_CONTACT "The junco developers <junco@example.org>")
set(CPACK_PACKAGE_DESCRIPTION_SUMMARY "bench characterisation of switching diodes")
string(CONCAT CPACK_PACKAGE_DESCRIPTION
  "juncod runs unattended bias sweeps on ordinary SCPI bench instruments, stores\n"
  "every reading in SQLite and fits each part's diode model (Is, n, Rs with\n"
  "standard errors); junco is its command-line client (lots, parts, design\n"
  "calculators, SPICE export, plots); junco-sim is a simulated bench.")
set(CPACK_PACKAGING_INSTALL_PREFIX ${CMAKE_INSTALL_PREFIX})
set(CPACK_STRIP_FILES ON)  # debug info stays in the build tree
set(CPACK_DEBIAN_FILE_NAME DEB-DEFAULT)  # junco_VERSION_ARCH.deb
set(CPACK_DEBIAN_PACKAGE_SECTION electronics)
# Depends from the binaries' shared libraries (dpkg-shlibdeps, from dpkg-dev).
set(CPACK_DEBIAN_PACKAGE_SHLIBDEPS ON)
set(CPACK_DEBIAN_PACKAGE_RECOMMENDS "gnuplot-nox, python3")  # junco plot; the Python client
set(CPACK_DEBIAN_PACKAGE_SUGGESTS "sqlite3, bash-completion")
set(CPACK_DEBIAN_PACKAGE_CONTROL_STRICT_PERMISSION ON)
set(JUNCO_DEB_SCRIPTS ${PROJECT_BINARY_DIR}/packaging/deb)
foreach(script conffiles postinst prerm postrm)
  configure_file(tools/packaging/deb/${script} ${JUNCO_DEB_SCRIPTS}/${script} @ONLY)
  list(APPEND CPACK_DEBIAN_PACKAGE_CONTROL_EXTRA ${JUNCO_DEB_SCRIPTS}/${script})
endforeach()
include(CPack)
