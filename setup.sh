#!/usr/bin/env bash
# Set up ringdown on Debian 12: install the packages it needs (when missing),
# configure and build. Run as root (or with sudo available) on a fresh machine.
#   bash setup.sh            install + Release build into build/
#   BUILD_TYPE=Debug bash setup.sh
set -euo pipefail
cd "$(dirname "$0")"

PACKAGES=(
  build-essential cmake pkg-config
  libeigen3-dev                       # dense/sparse linear algebra, MatrixFunctions
  libboost-dev libboost-iostreams-dev libboost-filesystem-dev   # Spirit X3, gnuplot-iostream
  libsuitesparse-dev                  # KLU sparse LU
  libcli11-dev nlohmann-json3-dev libfmt-dev
  libgtest-dev libgmock-dev libbenchmark-dev
  gnuplot-nox libgnuplot-iostream-dev
  libopenmpi-dev openmpi-bin          # the optional MPI build (RINGDOWN_MPI, docs/cluster.md; CI)
  python3 python3-numpy python3-scipy python3-mpmath   # reference libraries for tests/bench
)

missing=()
for p in "${PACKAGES[@]}"; do
  dpkg-query -W -f='${Status}' "$p" 2>/dev/null | grep -q "install ok installed" || missing+=("$p")
done
if ((${#missing[@]})); then
  echo "setup: installing ${missing[*]}"
  SUDO=""
  if [ "$(id -u)" -ne 0 ]; then SUDO="sudo"; fi
  export DEBIAN_FRONTEND=noninteractive
  $SUDO apt-get update -q
  $SUDO apt-get install -y -q --no-install-recommends "${missing[@]}"
fi

BUILD_TYPE="${BUILD_TYPE:-Release}"
cmake -S . -B build -DCMAKE_BUILD_TYPE="$BUILD_TYPE"
cmake --build build -j"$(nproc)"
echo "setup: built build/ringdown"
