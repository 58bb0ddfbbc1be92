#!/usr/bin/env bash
# Make sure ngspice (command line) and its shared library are installed.
# On Debian/Ubuntu as root, installs them; elsewhere says what to install.
set -euo pipefail

have_lib() {
    if [ -n "${NGSPICE_LIBRARY_PATH:-}" ] && [ -e "${NGSPICE_LIBRARY_PATH}" ]; then return 0; fi
    if command -v ldconfig >/dev/null 2>&1 && ldconfig -p 2>/dev/null | grep -q 'libngspice\.so '; then
        return 0
    fi
    for d in /usr/lib /usr/lib64 /usr/local/lib /usr/lib/x86_64-linux-gnu /usr/lib/aarch64-linux-gnu \
             /opt/homebrew/lib; do
        if [ -e "$d/libngspice.so" ] || [ -e "$d/libngspice.dylib" ]; then return 0; fi
    done
    return 1
}

if command -v ngspice >/dev/null 2>&1 && have_lib; then
    exit 0
fi

if [ "$(id -u)" = "0" ] && command -v apt-get >/dev/null 2>&1; then
    echo "simkit: installing ngspice and its shared library with apt-get ..." >&2
    export DEBIAN_FRONTEND=noninteractive
    apt-get update -qq
    apt-get install -y -qq ngspice libngspice0 libngspice0-dev >/dev/null
    if command -v ngspice >/dev/null 2>&1 && have_lib; then exit 0; fi
fi

cat >&2 <<'MSG'
simkit needs ngspice: the command-line program and its shared library (libngspice).
Install them, then run make again:
  Debian/Ubuntu:  sudo apt-get install ngspice libngspice0 libngspice0-dev
  Fedora:         sudo dnf install ngspice libngspice libngspice-devel
  macOS:          brew install ngspice libngspice
  Windows:        download ngspice (with ngspice.dll) from the ngspice project site,
                  or use WSL with the Debian/Ubuntu line above.
If the library is installed under another name, set NGSPICE_LIBRARY_PATH to its path
(for example NGSPICE_LIBRARY_PATH=libngspice.so.0).
MSG
exit 1
