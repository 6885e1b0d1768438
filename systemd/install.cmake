# Install rules and the Debian package.
#
#   cmake -S . -B build-pkg -G Ninja -DNIGHTJAR_NATIVE=OFF -DNIGHTJAR_BUILD_TESTS=OFF \
#         -DNIGHTJAR_BUILD_BENCH=OFF -DCMAKE_INSTALL_PREFIX=/usr
#   cmake --build build-pkg && cpack --config build-pkg/CPackConfig.cmake -B build-pkg/pkg
#
# FHS places (prefix /usr): /usr/bin/nightjar, /lib/systemd/system/nightjar.service,
# /etc/nightjar/nightjar.yaml (a conffile: local edits survive upgrades),
# /usr/share/nightjar/alert.schema.json and the docs in /usr/share/doc/nightjar.
# A package must not be tuned for the build machine's CPU, so NIGHTJAR_NATIVE=OFF.
include(GNUInstallDirs)

# The unit and /etc live outside the prefix on Debian whatever the prefix is.
set(NIGHTJAR_UNIT_DIR "/lib/systemd/system" CACHE PATH "Where the systemd unit is installed")
set(NIGHTJAR_CONFIG_DIR "/etc/nightjar" CACHE PATH "Where the example config is installed")

install(FILES ${PROJECT_SOURCE_DIR}/systemd/nightjar.service DESTINATION ${NIGHTJAR_UNIT_DIR})
install(FILES ${PROJECT_SOURCE_DIR}/config/nightjar.yaml DESTINATION ${NIGHTJAR_CONFIG_DIR})
if(EXISTS ${PROJECT_SOURCE_DIR}/config/alert.schema.json)
  install(FILES ${PROJECT_SOURCE_DIR}/config/alert.schema.json
          DESTINATION ${CMAKE_INSTALL_DATADIR}/nightjar)
endif()
install(FILES ${PROJECT_SOURCE_DIR}/README.md ${PROJECT_SOURCE_DIR}/LICENSE
        ${PROJECT_SOURCE_DIR}/replay_data/FORMAT.md
        DESTINATION ${CMAKE_INSTALL_DOCDIR})

set(CPACK_GENERATOR DEB)
set(CPACK_PACKAGE_NAME nightjar)
set(CPACK_PACKAGE_VERSION ${PROJECT_VERSION})
set(CPACK_PACKAGE_CONTACT "nightjar maintainers <nightjar@localhost>")
set(CPACK_PACKAGE_DESCRIPTION_SUMMARY
    "Advisory anomaly and expected-event alerts for plant sensor channels over MQTT")
set(CPACK_PACKAGING_INSTALL_PREFIX /usr)
set(CPACK_DEBIAN_FILE_NAME DEB-DEFAULT)
set(CPACK_DEBIAN_PACKAGE_SECTION misc)
# dpkg-shlibdeps works out the library packages (libmosquitto1, libyaml-cpp0.7, ...).
set(CPACK_DEBIAN_PACKAGE_SHLIBDEPS ON)
set(CPACK_DEBIAN_PACKAGE_RECOMMENDS "mosquitto-clients")
set(CPACK_DEBIAN_PACKAGE_CONTROL_EXTRA
    ${PROJECT_SOURCE_DIR}/systemd/debian/conffiles
    ${PROJECT_SOURCE_DIR}/systemd/debian/postinst
    ${PROJECT_SOURCE_DIR}/systemd/debian/prerm
    ${PROJECT_SOURCE_DIR}/systemd/debian/postrm)
set(CPACK_DEBIAN_PACKAGE_CONTROL_STRICT_PERMISSION ON)
include(CPack)
