#!/usr/bin/env bash
# One entry point for set-up and the two jobs the README promises.
#   bash dev.sh demo   set up .venv, solve the bundled demo town, write exports and the packet
#   bash dev.sh test   set up .venv (plus Chromium and poppler for the tests), run the whole suite
# A second run reuses .venv; it reinstalls only when pyproject.toml has changed.
set -euo pipefail
cd "$(dirname "$0")"
root=$(pwd)
venv="$root/.venv"
py="${PYTHON:-python3}"

setup_venv() {
  if [ ! -x "$venv/bin/python" ]; then
    "$py" -m venv "$venv"
  fi
  stamp="$venv/.installed-$(sha256sum pyproject.toml | cut -c1-16)"
  if [ ! -f "$stamp" ]; then
    echo "setting up $venv (a few minutes on a new machine)..." >&2
    log="$venv/install.log"
    if ! { "$venv/bin/python" -m pip install --upgrade pip &&
           "$venv/bin/python" -m pip install -e ".[test]"; } >"$log" 2>&1; then
      tail -30 "$log" >&2
      echo "installing the project failed; the whole log is in $log" >&2
      exit 1
    fi
    rm -f "$venv"/.installed-*
    touch "$stamp"
  fi
}

setup_test_tools() {
  # Browser tests drive Debian's Chromium through Playwright (never a browser download); the
  # packet test renders a page with poppler's pdftoppm as an independent PDF reader.
  local missing=()
  [ -x /usr/bin/chromium ] || missing+=(chromium)
  command -v pdftoppm >/dev/null || missing+=(poppler-utils)
  if [ "${#missing[@]}" -gt 0 ]; then
    local as_root=()
    [ "$(id -u)" = "0" ] || as_root=(sudo)
    "${as_root[@]}" apt-get update -qq
    "${as_root[@]}" env DEBIAN_FRONTEND=noninteractive apt-get install -y -qq "${missing[@]}" \
      >/dev/null
  fi
}

cmd="${1:-}"
shift || true
case "$cmd" in
  demo)
    setup_venv
    exec "$venv/bin/districting" demo "$@"
    ;;
  test)
    setup_venv
    setup_test_tools
    exec "$venv/bin/python" -m pytest "$@"
    ;;
  *)
    echo "usage: bash dev.sh demo | test" >&2
    exit 2
    ;;
esac
