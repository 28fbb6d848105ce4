#!/usr/bin/env bash
# Install the Debian packages the app and the full test suite need, when missing:
# Chromium (browser tests), PostgreSQL 15 (database tests), poppler-utils (PDF to PNG),
# Pango (WeasyPrint) and DejaVu fonts.  Needs root (or sudo); does nothing when all are there.
set -euo pipefail

need=()
command -v chromium >/dev/null 2>&1 || need+=(chromium)
ls /usr/lib/postgresql/*/bin/initdb >/dev/null 2>&1 || need+=(postgresql)
command -v pdftoppm >/dev/null 2>&1 || need+=(poppler-utils)
ldconfig -p 2>/dev/null | grep -q libpango-1.0 || need+=(libpango-1.0-0 libpangoft2-1.0-0)
[ -e /usr/share/fonts/truetype/dejavu/DejaVuSans.ttf ] || need+=(fonts-dejavu-core)
command -v make >/dev/null 2>&1 || need+=(make)
python3 -c "import venv, ensurepip" >/dev/null 2>&1 || need+=(python3-venv)

if [ ${#need[@]} -eq 0 ]; then
  exit 0
fi
echo "system-deps: installing ${need[*]}" >&2
SUDO=""
if [ "$(id -u)" -ne 0 ]; then
  SUDO="sudo"
fi
export DEBIAN_FRONTEND=noninteractive
$SUDO apt-get update -qq
$SUDO apt-get install -y -qq --no-install-recommends "${need[@]}" >/dev/null
