// toml++'s implementation, compiled once (TOML_IMPLEMENTATION; every other
// file includes toml++ with TOML_HEADER_ONLY=0): Debian ships toml++ as a
// shared library only, and the static aerosect command (CMakeLists.txt,
// AEROSECT_STATIC_CLI) cannot link it.
#define TOML_IMPLEMENTATION
#include <toml++/toml.h>
