#!/usr/bin/env bash
# Debian packages the tests use: Prometheus + promtool and Alertmanager (deploy kit and sink tests),
# Chromium (web page tests), scikit-learn (reference fits), fonts for screenshots, CA certificates.
# On a warm machine every package is already there and this step takes about a second.
set -euo pipefail

want=(prometheus prometheus-alertmanager chromium python3-sklearn fonts-dejavu-core ca-certificates)
missing=()
for p in "${want[@]}"; do
  # dpkg-query rather than `dpkg -s | grep -q`: with pipefail, grep's early exit would fail the pipe.
  if [ "$(dpkg-query -W -f='${Status}' "$p" 2>/dev/null || true)" != "install ok installed" ]; then
    missing+=("$p")
  fi
done

# Services that Debian's prometheus packages register; the tests start their own copies on free ports.
services=(prometheus prometheus-alertmanager prometheus-node-exporter)

stop_services() {
  for s in "${services[@]}"; do
    if [ -d /run/systemd/system ] && command -v systemctl >/dev/null 2>&1; then
      systemctl disable --now "$s" >/dev/null 2>&1 || true
    elif [ -x "/etc/init.d/$s" ]; then
      "/etc/init.d/$s" stop >/dev/null 2>&1 || true
    fi
  done
}

if [ "${#missing[@]}" -eq 0 ]; then
  echo "debian packages: all present (${want[*]})"
else
  echo "debian packages: installing ${missing[*]}"
  export DEBIAN_FRONTEND=noninteractive
  # Keep maintainer scripts from starting services (invoke-rc.d honours policy-rc.d exit 101).
  policy=/usr/sbin/policy-rc.d
  added_policy=0
  if [ ! -e "$policy" ]; then
    printf '#!/bin/sh\nexit 101\n' >"$policy"
    chmod +x "$policy"
    added_policy=1
  fi
  trap '[ "$added_policy" = 1 ] && rm -f "$policy"' EXIT
  apt-get update -qq
  apt-get install -y -qq --no-install-recommends "${missing[@]}"
  # Where a service started anyway (systemd units bypass policy-rc.d on some systems), stop and disable it
  # so that nothing holds the ports 9090/9093/9100 or the packages' data directories.
  stop_services
fi

for b in /usr/bin/prometheus /usr/bin/promtool /usr/bin/prometheus-alertmanager /usr/bin/chromium; do
  [ -x "$b" ] || { echo "missing $b after install" >&2; exit 1; }
done
