#!/usr/bin/env bash
# The Debian package built by CPack from this build tree holds the binary, the unit, the
# example config as a conffile and the docs in their FHS places, and its dependencies are
# worked out by dpkg-shlibdeps (libmosquitto among them).
#   check_deb.sh BUILD_DIR WORKDIR
set -euo pipefail
build="$1" work="$2"
rm -rf "$work" && mkdir -p "$work"
cpack --config "$build/CPackConfig.cmake" -B "$work" >"$work/cpack.log" 2>&1 || {
  cat "$work/cpack.log" >&2; exit 1; }
deb=$(ls "$work"/nightjar_*.deb)
dpkg-deb -c "$deb" | awk '{print $6}' >"$work/contents.txt"
for path in ./usr/bin/nightjar ./lib/systemd/system/nightjar.service \
    ./etc/nightjar/nightjar.yaml ./usr/share/doc/nightjar/README.md; do
  grep -qx "$path" "$work/contents.txt" || { echo "package lacks $path" >&2; cat "$work/contents.txt" >&2; exit 1; }
done
if grep -q "^./usr/include" "$work/contents.txt"; then echo "package ships headers" >&2; exit 1; fi
dpkg-deb -f "$deb" Depends | tee "$work/depends.txt"
grep -q "libmosquitto" "$work/depends.txt" || { echo "Depends lacks libmosquitto" >&2; exit 1; }
# Listings go to files first: under pipefail, `grep -q` quitting at its first match would
# make the writer die of SIGPIPE and fail the pipeline now and then.
dpkg-deb --ctrl-tarfile "$deb" | tar -t >"$work/control.txt"
grep -qx "./conffiles" "$work/control.txt" || { echo "no conffiles" >&2; cat "$work/control.txt" >&2; exit 1; }
dpkg-deb -I "$deb" conffiles >"$work/conffiles.txt"
grep -qx "/etc/nightjar/nightjar.yaml" "$work/conffiles.txt" || { echo "config is not a conffile" >&2; exit 1; }
echo "package ok: $(basename "$deb")"
