#!/usr/bin/env bash
# Install qemu-system-arm (10.x) from Debian's bookworm-backports suite, beside the image's
# qemu-utils 10.x. Debian's default bookworm qemu-system-arm (7.2) would downgrade qemu-utils.
# Idempotent: does nothing when qemu-system-arm is already on PATH.
#
# The machine's own apt sources do not list bookworm-backports, so (like the image did for
# qemu-utils) apt runs with a private sources list and private lists/cache directories under
# $APT_DIR; the system configuration is left as it is.
set -euo pipefail

if command -v qemu-system-arm >/dev/null 2>&1; then
  echo "qemu-system-arm present: $(qemu-system-arm --version | head -n1)"
  exit 0
fi

if apt-cache policy qemu-system-arm 2>/dev/null | grep -q 'bookworm-backports'; then
  # The suite is configured system-wide: use it directly.
  apt-get update -qq
  DEBIAN_FRONTEND=noninteractive apt-get install -y -qq --no-install-recommends \
    -t bookworm-backports qemu-system-arm
else
  APT_DIR=${APT_DIR:-/tmp/steadycal-apt-backports}
  mkdir -p "$APT_DIR/lists/partial" "$APT_DIR/archives/partial"
  cat > "$APT_DIR/sources.list" <<'LIST'
deb [signed-by=/usr/share/keyrings/debian-archive-keyring.gpg] http://deb.debian.org/debian bookworm main
deb [signed-by=/usr/share/keyrings/debian-archive-keyring.gpg] http://deb.debian.org/debian bookworm-updates main
deb [signed-by=/usr/share/keyrings/debian-archive-keyring.gpg] http://deb.debian.org/debian-security bookworm-security main
deb [signed-by=/usr/share/keyrings/debian-archive-keyring.gpg] http://deb.debian.org/debian bookworm-backports main
LIST
  apt_opts=(
    -o "Dir::Etc::sourcelist=$APT_DIR/sources.list"
    -o "Dir::Etc::sourceparts=-"
    -o "Dir::State::lists=$APT_DIR/lists"
    -o "Dir::Cache::archives=$APT_DIR/archives"
    -o "APT::Sandbox::User=root"
  )
  apt-get "${apt_opts[@]}" update -qq
  DEBIAN_FRONTEND=noninteractive apt-get "${apt_opts[@]}" install -y -qq \
    --no-install-recommends --no-remove -t bookworm-backports qemu-system-arm
fi

qemu-system-arm --version | head -n1
