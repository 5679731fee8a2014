# Shared helpers for the scripts in this folder. Source it; do not run it.

say() { printf '\033[1m==> %s\033[0m\n' "$*" >&2; }

# Installs a rustup component or target when it is missing.
ensure_rust() {
  if ! command -v cargo >/dev/null 2>&1; then
    echo "cargo is not on PATH: install Rust with rustup (https://rustup.rs) and run this again" >&2
    exit 1
  fi
  if command -v rustup >/dev/null 2>&1; then
    local installed
    installed=$(rustup component list --installed 2>/dev/null || true)
    for component in rustfmt clippy; do
      if ! grep -q "^$component" <<<"$installed"; then
        say "installing the Rust component $component"
        rustup component add "$component"
      fi
    done
    if ! rustup target list --installed 2>/dev/null | grep -q '^wasm32-unknown-unknown$'; then
      say "installing the Rust target wasm32-unknown-unknown"
      rustup target add wasm32-unknown-unknown
    fi
  fi
}

# Makes (once) the private venv with the reference libraries and prints its python's path.
# Prints nothing when no python3 is available.
reference_python() {
  local venv=.venv-reference python
  python=$(command -v python3 || true)
  [ -n "$python" ] || return 0
  if [ ! -x "$venv/bin/python" ] || ! "$venv/bin/python" -c 'import numpy, scipy, statsmodels' 2>/dev/null; then
    echo "creating $venv with the reference libraries from PyPI" >&2
    rm -rf "$venv"
    "$python" -m venv "$venv" >&2
    "$venv/bin/pip" install --quiet --disable-pip-version-check -r scripts/reference/requirements.txt >&2
  fi
  echo "$venv/bin/python"
}

# Node.js runs the page's build step and its browser tests.
ensure_node() {
  if ! command -v node >/dev/null 2>&1 || ! command -v npm >/dev/null 2>&1; then
    echo "node and npm are not on PATH: install Node.js 18 or newer (Debian: apt-get install nodejs npm)" >&2
    exit 1
  fi
}

# Debian's Chromium for the page's tests (never a browser download). Installs it with apt-get
# when missing and this user may; otherwise says how.
ensure_chromium() {
  [ -x /usr/bin/chromium ] && return 0
  if [ "$(id -u)" = 0 ] && command -v apt-get >/dev/null 2>&1; then
    say "installing Debian's chromium"
    DEBIAN_FRONTEND=noninteractive apt-get install -y chromium >/dev/null \
      || { apt-get update >/dev/null && DEBIAN_FRONTEND=noninteractive apt-get install -y chromium >/dev/null; }
  else
    echo "Chromium is not installed at /usr/bin/chromium: run 'sudo apt-get install -y chromium'" >&2
    exit 1
  fi
}
