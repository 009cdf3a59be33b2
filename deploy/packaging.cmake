# Installation layout and the Debian package (CPack):
#   cmake --build build --target package   ->  build/taut_<version>_<arch>.deb
# The package holds the executable, the systemd units (SQLite; PostgreSQL
# replicas, a template unit) and their sysusers.d
# entry, the configuration example and the man page; postinst creates the
# service user and a first /etc/taut/taut.conf (deploy/debian/).
include(GNUInstallDirs)

install(TARGETS taut RUNTIME DESTINATION ${CMAKE_INSTALL_BINDIR})
install(FILES ${CMAKE_SOURCE_DIR}/deploy/systemd/taut.service ${CMAKE_SOURCE_DIR}/deploy/systemd/taut-postgres@.service
        DESTINATION lib/systemd/system)
install(FILES ${CMAKE_SOURCE_DIR}/deploy/systemd/taut.sysusers DESTINATION lib/sysusers.d RENAME taut.conf)
install(FILES ${CMAKE_SOURCE_DIR}/deploy/taut.conf.example ${CMAKE_SOURCE_DIR}/deploy/taut-postgres.conf.example
              ${CMAKE_SOURCE_DIR}/docs/OPERATIONS.md
        DESTINATION ${CMAKE_INSTALL_DOCDIR})
install(FILES ${CMAKE_SOURCE_DIR}/deploy/taut.1 DESTINATION ${CMAKE_INSTALL_MANDIR}/man1)

set(CPACK_GENERATOR DEB)
set(CPACK_PACKAGE_NAME taut)
set(CPACK_PACKAGE_VERSION ${PROJECT_VERSION})
set(CPACK_PACKAGING_INSTALL_PREFIX /usr)
set(CPACK_PACKAGE_DESCRIPTION_SUMMARY
    "axial force, bending stiffness and end restraint of slender members from vibration records")
set(CPACK_PACKAGE_CONTACT "taut maintainers <maintainers@taut.invalid>")
set(CPACK_DEBIAN_FILE_NAME DEB-DEFAULT)
set(CPACK_DEBIAN_PACKAGE_SECTION science)
# dpkg-shlibdeps reads the executable's shared libraries (Ceres, SQLite,
# OpenSSL, ...) and writes the Depends line: no list kept by hand.
set(CPACK_DEBIAN_PACKAGE_SHLIBDEPS ON)
set(CPACK_DEBIAN_PACKAGE_CONTROL_EXTRA
    ${CMAKE_SOURCE_DIR}/deploy/debian/postinst ${CMAKE_SOURCE_DIR}/deploy/debian/prerm)
set(CPACK_STRIP_FILES ON)
include(CPack)
