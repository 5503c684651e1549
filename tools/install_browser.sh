#!/usr/bin/env bash
# Make Debian's headless-capable Chromium available for the browser tests (tests/browser/).
#
# Exit 0 when the browser is present afterwards, 1 when it is not (not root, no apt-get, or the
# install failed). The Makefile treats 1 as "no browser here": the browser tests then skip on a
# developer machine and fail under CI (see the Makefile and tests/browser/).
set -uo pipefail

have_browser() {
    [ -x /usr/bin/chromium ] || command -v chromium >/dev/null 2>&1
}

if have_browser; then
    exit 0
fi

say() { echo "install_browser: $*" >&2; }

if [ "${EUID:-$(id -u)}" -ne 0 ]; then
    say "chromium is missing and this is not root; install it with:" \
        "sudo apt-get install -y --no-install-recommends chromium"
    exit 1
fi
if ! command -v apt-get >/dev/null 2>&1; then
    say "chromium is missing and apt-get is not available; install Chromium by other means"
    exit 1
fi

export DEBIAN_FRONTEND=noninteractive
apt_install() {
    apt-get -o DPkg::Lock::Timeout=300 install -y --no-install-recommends chromium
}

say "installing Debian's chromium (once; remembered by a stamp in the virtual environment)"
if ! apt_install; then
    # A fresh machine has no package index yet, an old one may point at removed versions.
    say "install failed; refreshing the package index and trying again"
    apt-get -o DPkg::Lock::Timeout=300 update && apt_install
fi

if have_browser; then
    exit 0
fi
say "chromium could not be installed"
exit 1
