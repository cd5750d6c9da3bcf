#!/usr/bin/env bash
# Checks every report.html in a real browser: installs Debian's chromium when it is missing
# (needs root, as in CI), then runs tests/report_browser.rs (module report_browser of the
# tests/suite binary) with the browser required.
# Run from anywhere after `cargo test --locked` (the test binary is then already built).
set -euo pipefail
cd "$(dirname "$0")/.."
if ! command -v chromium >/dev/null 2>&1; then
    export DEBIAN_FRONTEND=noninteractive
    apt-get update -qq
    apt-get install -y -qq --no-install-recommends chromium fonts-dejavu-core >/dev/null
fi
chromium --version
SEEDLINE_REQUIRE_BROWSER=1 cargo test --locked --test suite report_browser:: -- --nocapture
