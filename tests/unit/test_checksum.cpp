#include <catch2/catch.hpp>

#include <fstream>
#include <string>

#include "aerosect/io/checksum.hpp"
#include "hdf5_helpers.hpp"

using namespace aerosect;

TEST_CASE("SHA-256 of the FIPS 180-2 examples", "[checksum]") {
  // FIPS 180-2, appendix B.1 and B.2 (one-block and two-block messages),
  // and the digest of the empty message (NIST example values).
  CHECK(sha256_hex("abc") == "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad");
  CHECK(sha256_hex("abcdbcdecdefdefgefghfghighijhijkijkljklmklmnlmnomnopnopq") ==
        "248d6a61d20638b8e5c026930c3e6039a33ce45964ff2167f6ecedd419db06c1");
  CHECK(sha256_hex("") == "e3b0c44298fc1c149afbf4c8996fb92427ae41e4649b934ca495991b7852b855");
}

TEST_CASE("SHA-256 of a file equals that of its bytes, across read blocks", "[checksum]") {
  // FIPS 180-2 appendix B.3: one million 'a' (16 read blocks of 64 KiB).
  test::TempDir dir;
  const std::string path = dir.file("million_a.bin");
  {
    std::ofstream out(path, std::ios::binary);
    out << std::string(1000000, 'a');
  }
  const auto d = sha256_hex_of_file(path);
  REQUIRE(d);
  CHECK(*d == "cdc76e5c9914fb9281a1c7e284d73e67f1809a48a497200e046d39ccc7112cd0");
  CHECK_FALSE(sha256_hex_of_file(dir.file("missing.bin")));
}
