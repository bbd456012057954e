#!/usr/bin/env bash
# Qt (inside the PySide6 wheel) links system libraries that a fresh or minimal Linux may lack.
# Find the missing ones with ldd on Qt's libraries and the chosen window platform plugin, then
#   as root with apt-get: install the Debian/Ubuntu packages that provide them;
#   otherwise: print the exact command to install them, and stop (exit 1).
#
#   scripts/qt-system-libs.sh PYTHON PLATFORM     PLATFORM: xcb (a window on an X11/XWayland desktop)
#                                                           or offscreen (headless tests)
# QT_LIBS_DRY_RUN=1 prints what would be installed instead of installing it.
set -euo pipefail

PYTHON=${1:?usage: qt-system-libs.sh PYTHON xcb|offscreen}
PLATFORM=${2:?usage: qt-system-libs.sh PYTHON xcb|offscreen}

# shared object -> Debian/Ubuntu package (names checked against Debian 12; Ubuntu 22.04+ uses the same)
declare -A PKG=(
  [libEGL.so.1]=libegl1 [libGL.so.1]=libgl1 [libGLX.so.0]=libglx0 [libOpenGL.so.0]=libopengl0
  [libGLdispatch.so.0]=libglvnd0 [libfontconfig.so.1]=libfontconfig1 [libfreetype.so.6]=libfreetype6
  [libxkbcommon.so.0]=libxkbcommon0 [libdbus-1.so.3]=libdbus-1-3 [libglib-2.0.so.0]=libglib2.0-0
  [libgthread-2.0.so.0]=libglib2.0-0 [libpng16.so.16]=libpng16-16 [libharfbuzz.so.0]=libharfbuzz0b
  [libicuuc.so.72]=libicu72 [libX11.so.6]=libx11-6 [libX11-xcb.so.1]=libx11-xcb1 [libXau.so.6]=libxau6
  [libXdmcp.so.6]=libxdmcp6 [libSM.so.6]=libsm6 [libICE.so.6]=libice6 [libxcb.so.1]=libxcb1
  [libxkbcommon-x11.so.0]=libxkbcommon-x11-0 [libxcb-cursor.so.0]=libxcb-cursor0
  [libxcb-icccm.so.4]=libxcb-icccm4 [libxcb-keysyms.so.1]=libxcb-keysyms1 [libxcb-image.so.0]=libxcb-image0
  [libxcb-render-util.so.0]=libxcb-render-util0 [libxcb-xinerama.so.0]=libxcb-xinerama0
  [libxcb-xkb.so.1]=libxcb-xkb1 [libxcb-util.so.1]=libxcb-util1 [libxcb-randr.so.0]=libxcb-randr0
  [libxcb-render.so.0]=libxcb-render0 [libxcb-shape.so.0]=libxcb-shape0 [libxcb-shm.so.0]=libxcb-shm0
  [libxcb-sync.so.1]=libxcb-sync1 [libxcb-xfixes.so.0]=libxcb-xfixes0 [libxcb-glx.so.0]=libxcb-glx0
  [libxcb-xinput.so.0]=libxcb-xinput0 [libxcb-present.so.0]=libxcb-present0 [libxcb-dri3.so.0]=libxcb-dri3-0
)

qt=$("$PYTHON" -c 'import PySide6, os; print(os.path.dirname(PySide6.__file__))' 2>/dev/null) || {
  echo "qt-system-libs: PySide6 is not installed for $PYTHON" >&2; exit 1; }
case "$PLATFORM" in
  xcb) plugin=libqxcb.so; what="Qt's X11 window platform (xcb)";;
  offscreen) plugin=libqoffscreen.so; what="Qt's offscreen platform";;
  *) echo "qt-system-libs: unknown platform '$PLATFORM' (xcb or offscreen)" >&2; exit 2;;
esac
files=("$qt"/Qt/lib/libQt6Gui.so.6 "$qt"/Qt/lib/libQt6Widgets.so.6 "$qt"/Qt/lib/libQt6Svg.so.6
       "$qt"/Qt/plugins/platforms/$plugin)
[ "$PLATFORM" = xcb ] && files+=("$qt"/Qt/lib/libQt6XcbQpa.so.6)

missing=$(for f in "${files[@]}"; do [ -e "$f" ] && ldd "$f" 2>/dev/null; done | awk '/=> not found/ {print $1}' | sort -u)
[ -z "$missing" ] && exit 0

need=() unknown=()
for lib in $missing; do
  if [ -n "${PKG[$lib]:-}" ]; then need+=("${PKG[$lib]}"); else unknown+=("$lib"); fi
done
mapfile -t need < <(printf '%s\n' "${need[@]}" | sort -u | sed '/^$/d')

echo "$what needs system libraries that are missing here: $(echo $missing)"
if [ ${#unknown[@]} -gt 0 ]; then
  echo "  no package known for: ${unknown[*]} (find the package that provides each with your package manager)"
fi
[ ${#need[@]} -eq 0 ] && exit 1

if ! command -v apt-get >/dev/null 2>&1; then
  echo "  on Debian or Ubuntu they come in: ${need[*]}; on this system install the packages that provide them"
  echo "  (for example: dnf provides '*/$(echo $missing | cut -d' ' -f1)')"
  exit 1
fi
if [ "$(id -u)" -ne 0 ]; then
  echo "Install them with:"
  echo "  sudo apt-get install --no-install-recommends ${need[*]}"
  echo "then run the same make command again."
  exit 1
fi
if [ -n "${QT_LIBS_DRY_RUN:-}" ]; then
  echo "would install: ${need[*]}"
  exit 0
fi
echo "installing: ${need[*]}"
export DEBIAN_FRONTEND=noninteractive
apt-get update -qq && apt-get install -y -qq --no-install-recommends "${need[@]}"
