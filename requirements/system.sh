#!/usr/bin/env bash
# The operating-system packages dotledger needs (Debian package names), checked before every install.
#
#   bash requirements/system.sh run    what serving and printing need (make demo)
#   bash requirements/system.sh test   that, plus what the test suite needs (make test, .ci/run)
#
# Missing packages are installed with apt-get when this runs as root; otherwise it stops with one
# line naming them. PYTHON names the interpreter that will build the virtual environment.
set -euo pipefail

profile="${1:-test}"
case "$profile" in run|test) ;; *) echo "usage: $0 run|test" >&2; exit 2 ;; esac
python="${PYTHON:-python3}"

ldconfig="$(command -v ldconfig || echo /sbin/ldconfig)"
has_lib() {  # a shared library the dynamic loader can find
  "$ldconfig" -p 2>/dev/null | grep -q "[[:space:]]$1 " \
    || [ -n "$(find /usr/lib /usr/lib64 /lib -maxdepth 2 -name "$1" 2>/dev/null | head -n 1)" ]
}

missing=()
need() {  # need <debian package> <check command…>: the package is missing when the check fails
  local package="$1"; shift
  "$@" >/dev/null 2>&1 || missing+=("$package")
}

# WeasyPrint renders the documents with Pango and subsets fonts with HarfBuzz; without the subset
# library it warns at import, and the test suite turns warnings into errors.
need libpango-1.0-0      has_lib libpango-1.0.so.0
need libpangoft2-1.0-0   has_lib libpangoft2-1.0.so.0
need libharfbuzz-subset0 has_lib libharfbuzz-subset.so.0
# The print stylesheet asks for DejaVu Sans (µ, ≥, subscripts and the like).
need fonts-dejavu-core   test -f /usr/share/fonts/truetype/dejavu/DejaVuSans.ttf
# `python -m venv` with pip inside (Debian splits ensurepip off the interpreter).
need python3-venv        "$python" -c "import ensurepip, venv"
if [ "$profile" = test ]; then
  # Browser tests drive Debian's Chromium (never a browser download of a test tool's own).
  need chromium          test -x /usr/bin/chromium
  # `dotledger backup` / `restore` on PostgreSQL run pg_dump and pg_restore (tests/test_backup.py).
  need postgresql-client command -v pg_dump
  # The container labels' QR codes are read back from the printed page: pdftoppm draws the PDF,
  # zbarimg decodes the codes (tests/test_labels.py, tests/browser/test_ledger_browser.py).
  need poppler-utils     command -v pdftoppm
  need zbar-tools        command -v zbarimg
fi

if [ "${#missing[@]}" -eq 0 ]; then
  exit 0
fi
if [ "$(id -u)" -ne 0 ] || ! command -v apt-get >/dev/null 2>&1; then
  echo "dotledger needs these system packages; install them as root, then run this again: apt-get install ${missing[*]}" >&2
  exit 1
fi
echo "installing system packages: ${missing[*]}" >&2
export DEBIAN_FRONTEND=noninteractive
apt-get update -qq
apt-get install -y -qq --no-install-recommends "${missing[@]}" >/dev/null
echo "installed: ${missing[*]}" >&2
