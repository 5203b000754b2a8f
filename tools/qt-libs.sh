#!/bin/sh
# Install the system libraries Qt (PySide6) needs, where they are missing.
#
#   sh tools/qt-libs.sh            libraries for a real window (X11) and offscreen
#   sh tools/qt-libs.sh offscreen  only what the offscreen platform (tests, CI) needs
#
# Debian and Ubuntu only (apt-get); elsewhere it lists what to look for and goes on.
# Runs apt-get as root, or through sudo when that works without a password; otherwise
# it prints the command for an administrator and goes on (the app then says what is
# missing when it starts).
set -eu
OFFSCREEN="libegl1 libgl1 libxkbcommon0 libfontconfig1 libglib2.0-0 libdbus-1-3"
WINDOW="libxkbcommon-x11-0 libxcb-cursor0 libxcb-icccm4 libxcb-image0 libxcb-keysyms1
        libxcb-randr0 libxcb-render-util0 libxcb-shape0 libxcb-xinerama0 libxcb-xkb1
        libx11-xcb1"
want="$OFFSCREEN"
[ "${1:-}" = offscreen ] || want="$OFFSCREEN $WINDOW"

if ! command -v dpkg >/dev/null 2>&1 || ! command -v apt-get >/dev/null 2>&1; then
  echo "qt-libs: not a Debian-like system; make sure these (or your system's equivalents) are installed: $want" >&2
  exit 0
fi
need=""
for pkg in $want; do
  dpkg -s "$pkg" >/dev/null 2>&1 || need="$need $pkg"
done
[ -z "$need" ] && exit 0
if [ "$(id -u)" = 0 ]; then
  run=""
elif command -v sudo >/dev/null 2>&1 && sudo -n true 2>/dev/null; then
  run="sudo"
else
  echo "qt-libs: Qt needs:$need — ask an administrator to run: sudo apt-get install$need" >&2
  exit 0
fi
echo "qt-libs: installing$need" >&2
$run apt-get update -qq
DEBIAN_FRONTEND=noninteractive $run apt-get install -y -qq $need >/dev/null
