# Shared set-up for tools/demo, tools/test and tools/bench (sourced, not run).
# Installs missing Debian packages (skips apt when all are present), then
# configures and builds aerosect (Release) in $BUILD_DIR (default: build/).
set -euo pipefail

ROOT="$(cd "$(dirname "${BASH_SOURCE[0]}")/.." && pwd)"
BUILD_DIR="${BUILD_DIR:-$ROOT/build}"
JOBS="${JOBS:-$(nproc)}"

AEROSECT_PACKAGES=(
  g++ cmake ninja-build pkg-config
  libboost-dev libeigen3-dev libhdf5-dev libfmt-dev catch2 libtomlplusplus-dev
  libcli11-dev nlohmann-json3-dev nettle-dev
  hdf5-tools netcdf-bin
  python3-h5py python3-numpy python3-scipy python3-matplotlib python3-netcdf4 python3-xarray
  pybind11-dev python3-dev  # the Python package (src/python, tests/python)
  python3-h5netcdf python3-pytest  # its tests and the CF conventions test (tests/integration/test_cf_conventions.py)
  chromium python3-websocket  # the HTML report's browser test (tests/integration/browser.py)
)

# tools/test also installs these for the README's cluster recipes, run
# verbatim on a single-node Slurm the test starts itself and with GNU parallel
# (tests/integration/test_cluster_recipes.py). Not in the list above because
# tools/demo needs none of them and Debian's packages enable the munge and
# Slurm services on a machine with systemd (a container does not start them).
AEROSECT_CLUSTER_PACKAGES=(slurmctld slurmd slurm-client munge parallel)

# The hardened stages of tools/test (sanitizer build, tools/fuzz) also need
# clang with its sanitizer and libFuzzer runtimes.
AEROSECT_CHECK_PACKAGES=(clang libclang-rt-14-dev)

# Extra cmake arguments for build_aerosect (a caller sets them before the call).
EXTRA_CMAKE_ARGS=()

ensure_packages() {
  local missing=()
  for p in "$@"; do
    if ! dpkg-query -W -f='${Status}' "$p" 2>/dev/null | grep -q "install ok installed"; then
      missing+=("$p")
    fi
  done
  if [ ${#missing[@]} -eq 0 ]; then
    return 0
  fi
  echo "aerosect: installing missing Debian packages: ${missing[*]}" >&2
  local sudo=""
  if [ "$(id -u)" -ne 0 ]; then sudo="sudo"; fi
  $sudo apt-get update -qq
  DEBIAN_FRONTEND=noninteractive $sudo apt-get install -y --no-install-recommends "${missing[@]}"
}

# build_aerosect [TARGET...]: packages, configure (Release, with the tests
# target defined, then EXTRA_CMAKE_ARGS; warnings are errors when
# AEROSECT_WERROR=ON, as in CI; a unity build when AEROSECT_UNITY=ON, as in
# CI: about 8 sources per compiler run, which parse the heavy headers
# (Eigen, CLI11, nlohmann_json, toml++) once instead of 8 times) and build
# the given targets (all when none is given).
build_aerosect() {
  ensure_packages "${AEROSECT_PACKAGES[@]}"
  local launcher=()
  # ccache, when the machine has it, only speeds up rebuilds (not installed by us).
  if command -v ccache >/dev/null 2>&1; then launcher=(-DCMAKE_CXX_COMPILER_LAUNCHER=ccache); fi
  cmake -S "$ROOT" -B "$BUILD_DIR" -G Ninja -DCMAKE_BUILD_TYPE=Release \
    -DAEROSECT_BUILD_TESTS=ON -DAEROSECT_WERROR="${AEROSECT_WERROR:-OFF}" \
    -DCMAKE_UNITY_BUILD="${AEROSECT_UNITY:-OFF}" "${launcher[@]}" \
    "${EXTRA_CMAKE_ARGS[@]}" >/dev/null
  local targets=()
  for t in "$@"; do targets+=(--target "$t"); done
  cmake --build "$BUILD_DIR" -j "$JOBS" "${targets[@]}"
}
