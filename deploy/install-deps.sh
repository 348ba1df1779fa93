#!/usr/bin/env bash
# Installs the Debian packages Skerry needs to build, test and run.
#
# Idempotent and non-interactive: asks dpkg-query which packages are missing and
# installs only those, running `apt-get update` once first, and only when
# something is missing. Uses sudo only when not already root.
#
#   deploy/install-deps.sh                # build, test (every default tier), run
#   deploy/install-deps.sh --deploy-tier  # and the opt-in deploy tier: Slurm, munge
set -euo pipefail

PACKAGES=(
  build-essential
  cmake
  ninja-build
  ccache
  pkg-config
  libgrpc++-dev
  protobuf-compiler-grpc
  libprotobuf-dev
  protobuf-compiler
  libabsl-dev
  libsqlite3-dev
  # SHA-256 through OpenSSL's EVP (common/sha256.h)
  libssl-dev
  sqlite3
  libgtest-dev
  libgmock-dev
  libboost-dev
  libeigen3-dev
  # random_test checks the Philox streams against Random123's own header
  librandom123-dev
  python3
  openssl
  clang-format
  # skerry-worker runs evaluator programs in a bubblewrap sandbox
  bubblewrap
  # scripts/clang-check: clang's -Wthread-safety over the libraries.
  clang
  # Deploy tests: the package (dpkg-shlibdeps, readelf), the units
  # (systemd-analyze), the manifests (PyYAML), network namespaces (ip, tc).
  dpkg-dev
  binutils
  systemd
  python3-yaml
  iproute2
  # The report page and the coordinator's web port (docs/report.md).
  libcpp-httplib-dev
  libjs-chart.js
  # Tests: a headless browser loads the report and the live page; promtool
  # checks /metrics (the prometheus package, which brings its web assets).
  chromium
  prometheus
  # Tests: the rank-sum test of `skerry compare` against scipy.stats.
  python3-scipy
)
if [[ "${1:-}" == "--deploy-tier" ]]; then
  # A real single-node Slurm for tests/deploy/slurm_test.cc.
  PACKAGES+=(slurmd slurmctld slurm-client munge)
elif [[ $# -gt 0 ]]; then
  echo "install-deps: unknown argument \"$1\" (only --deploy-tier)" >&2
  exit 2
fi

installed() {
  local status
  status="$(dpkg-query -W -f='${db:Status-Status}' "$1" 2>/dev/null || true)"
  [[ "${status}" == "installed" ]]
}

missing=()
for package in "${PACKAGES[@]}"; do
  if ! installed "${package}"; then
    missing+=("${package}")
  fi
done

if [[ ${#missing[@]} -eq 0 ]]; then
  echo "install-deps: all ${#PACKAGES[@]} packages already installed"
  exit 0
fi

if ! command -v apt-get >/dev/null 2>&1; then
  echo "install-deps: missing packages (${missing[*]}) and no apt-get here;" \
    "install them with your system's package manager" >&2
  exit 1
fi

as_root=()
if [[ "$(id -u)" -ne 0 ]]; then
  if ! command -v sudo >/dev/null 2>&1; then
    echo "install-deps: need root (or sudo) to install: ${missing[*]}" >&2
    exit 1
  fi
  as_root=(sudo)
fi

echo "install-deps: installing ${missing[*]}"
export DEBIAN_FRONTEND=noninteractive
"${as_root[@]}" apt-get update
"${as_root[@]}" apt-get install -y --no-install-recommends "${missing[@]}"
