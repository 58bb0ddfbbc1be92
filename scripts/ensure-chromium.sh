#!/usr/bin/env bash
# Make sure a headless Chromium is installed: the report tests open report.html in it.
# On Debian/Ubuntu as root, installs Debian's `chromium` package; elsewhere says what to install.
set -euo pipefail

find_browser() {
    if [ -n "${SIMKIT_CHROMIUM:-}" ] && command -v "${SIMKIT_CHROMIUM}" >/dev/null 2>&1; then return 0; fi
    for b in chromium chromium-browser google-chrome google-chrome-stable; do
        if command -v "$b" >/dev/null 2>&1; then return 0; fi
    done
    return 1
}

if find_browser; then
    exit 0
fi

if [ "$(id -u)" = "0" ] && command -v apt-get >/dev/null 2>&1; then
    echo "simkit: installing chromium (headless browser for the report tests) with apt-get ..." >&2
    export DEBIAN_FRONTEND=noninteractive
    apt-get update -qq
    apt-get install -y -qq chromium >/dev/null
    if find_browser; then exit 0; fi
fi

cat >&2 <<'MSG'
simkit's report tests open the HTML report in a headless Chromium, which is missing.
Install it, then run make again:
  Debian:         sudo apt-get install chromium
  Ubuntu:         sudo apt-get install chromium-browser   (or the chromium snap)
  Fedora:         sudo dnf install chromium
  macOS:          brew install --cask chromium
Or point SIMKIT_CHROMIUM at a Chromium or Chrome executable already installed.
MSG
exit 1
