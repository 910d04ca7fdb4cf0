#!/usr/bin/env bash
# Installs what termvel's tests need on a fresh machine of this kind, and
# nothing when it is already there: Debian packages (tmux for the terminal
# tests; mosquitto, mosquitto-clients and openssl for the sharing tests; qemu-system-x86 and busybox-static for the SocketCAN VM test, whose
# script fetches Debian's kernel package itself), and a Python venv in .venv with the independent reference
# libraries the cross-checks use (python-can, pyarrow, scipy). Safe to run again.
set -euo pipefail
cd "$(dirname "$0")/.."

need_apt=()
command -v tmux >/dev/null 2>&1 || need_apt+=(tmux)
command -v qemu-system-x86_64 >/dev/null 2>&1 || need_apt+=(qemu-system-x86)
dpkg -s busybox-static >/dev/null 2>&1 || need_apt+=(busybox-static)
# The MQTT broker and its command-line clients for the sharing tests (tests/suite/share.rs).
command -v mosquitto >/dev/null 2>&1 || [ -x /usr/sbin/mosquitto ] || need_apt+=(mosquitto)
command -v mosquitto_sub >/dev/null 2>&1 || need_apt+=(mosquitto-clients)
# openssl makes the CA, broker and client certificates of the TLS tests (tests/suite/share_security.rs).
command -v openssl >/dev/null 2>&1 || need_apt+=(openssl)
if ((${#need_apt[@]})); then
  sudo=""
  [ "$(id -u)" -eq 0 ] || sudo="sudo"
  echo "setup: installing ${need_apt[*]}"
  $sudo apt-get update -qq
  DEBIAN_FRONTEND=noninteractive $sudo apt-get install -y -qq --no-install-recommends "${need_apt[@]}"
fi

if [ ! -x .venv/bin/python ] || ! .venv/bin/python -c 'import can, pyarrow, scipy' 2>/dev/null; then
  echo "setup: creating .venv with tests/requirements.txt"
  python3 -m venv .venv
  .venv/bin/pip install -q --disable-pip-version-check -r tests/requirements.txt
fi
echo "setup: done"
