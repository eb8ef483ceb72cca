# Shared by scripts/serve and scripts/test (sourced, not run): the checkout's virtual
# environment .venv, made with the system's python3, and the Debian packages a step needs.
# Debian's and Ubuntu's python3 are "externally managed" (PEP 668): nothing is ever installed
# into them, only into .venv.

VENV=${VENV:-.venv}
PIP_QUIET=(-q --disable-pip-version-check)

as_root() {  # run a command as root: directly when root, else through sudo
  if [ "$(id -u)" -eq 0 ]; then "$@"; else sudo "$@"; fi
}

apt_install_missing() {  # apt_install_missing PACKAGE...: install those not installed yet
  local missing=() p
  for p in "$@"; do
    dpkg-query -W -f='${Status}' "$p" 2>/dev/null | grep -q "install ok installed" || missing+=("$p")
  done
  if [ ${#missing[@]} -gt 0 ]; then
    echo "installing Debian packages: ${missing[*]}"
    as_root apt-get update -qq
    as_root env DEBIAN_FRONTEND=noninteractive apt-get install -y -qq "${missing[@]}" >/dev/null
  fi
}

ensure_venv() {  # make .venv with python3 (installing python3-venv first if the system lacks it)
  if [ -x "$VENV/bin/python" ] && "$VENV/bin/python" -c 'import sys' 2>/dev/null; then
    return
  fi
  if ! python3 -c 'import ensurepip, venv' 2>/dev/null; then
    apt_install_missing python3-venv
  fi
  echo "creating the virtual environment $VENV"
  python3 -m venv "$VENV"
}

install_runtime() {  # the locked runtime packages (hash-checked), then the service itself, editable
  "$VENV/bin/python" -m pip install "${PIP_QUIET[@]}" --require-hashes -r requirements.lock
  "$VENV/bin/python" -m pip install "${PIP_QUIET[@]}" --no-deps -e .
}

install_test_extras() {  # the test extras, with every runtime package held at its locked version
  local constraints
  constraints=$(mktemp)
  grep -E '^[A-Za-z0-9]' requirements.lock | sed 's/ *\\$//' > "$constraints"
  "$VENV/bin/python" -m pip install "${PIP_QUIET[@]}" -c "$constraints" -e '.[test]'
  rm -f "$constraints"
}
