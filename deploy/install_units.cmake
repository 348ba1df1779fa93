# Run by `cmake --install` and CPack (install(SCRIPT) in deploy/CMakeLists.txt):
# installs the systemd units with the paths of this installation filled in, the
# settings files, and the coordinator's sysusers.d entry.
# In: CMAKE_INSTALL_PREFIX (of this install), SKERRY_DEPLOY_SOURCE, SKERRY_BINDIR.
if(CMAKE_INSTALL_PREFIX STREQUAL "/usr")
  set(conf_dir "/etc/skerry")
else()
  set(conf_dir "${CMAKE_INSTALL_PREFIX}/etc/skerry")
endif()
set(bin_dir "${CMAKE_INSTALL_PREFIX}/${SKERRY_BINDIR}")
set(unit_dir "${CMAKE_INSTALL_PREFIX}/lib/systemd/system")
# file(INSTALL) adds DESTDIR by itself; file(WRITE) needs it spelt out.
set(staging "$ENV{DESTDIR}")

foreach(unit skerry-coordinator.service skerry-worker@.service)
  file(READ "${SKERRY_DEPLOY_SOURCE}/systemd/${unit}" text)
  string(REPLACE "/usr/bin/" "${bin_dir}/" text "${text}")
  string(REPLACE "/etc/skerry/" "${conf_dir}/" text "${text}")
  message(STATUS "Installing: ${staging}${unit_dir}/${unit}")
  file(WRITE "${staging}${unit_dir}/${unit}" "${text}")
  list(APPEND CMAKE_INSTALL_MANIFEST_FILES "${unit_dir}/${unit}")
endforeach()
file(INSTALL "${SKERRY_DEPLOY_SOURCE}/systemd/coordinator.env"
  "${SKERRY_DEPLOY_SOURCE}/systemd/worker.env"
  DESTINATION "${conf_dir}")
file(INSTALL "${SKERRY_DEPLOY_SOURCE}/systemd/skerry.sysusers"
  DESTINATION "${CMAKE_INSTALL_PREFIX}/lib/sysusers.d"
  RENAME skerry.conf)
