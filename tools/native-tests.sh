#!/usr/bin/env bash
# The native half of `./build.sh test`: installs ngspice when missing, then runs the format check
# and every native Rust test (unit, integration against scipy data, ngspice, CLI, tidy).
set -euo pipefail
cd "$(dirname "$0")/.."

if ! command -v ngspice >/dev/null 2>&1; then
  echo "== installing ngspice (Debian package) =="
  apt-get update -qq
  DEBIAN_FRONTEND=noninteractive apt-get install -y -qq ngspice
fi

echo "== cargo fmt --check =="
cargo fmt --all -- --check

echo "== native tests =="
cargo test --no-fail-fast
cargo bench --no-run
