// SHA-256 and HMAC-SHA256 against published test vectors.
#include <doctest/doctest.h>

#include <string>

#include "beamtrim/store.h"
#include "store/sha256.h"

using namespace beamtrim;
using namespace beamtrim::store_internal;

TEST_CASE("Sha256MatchesFips180Examples") {
  // FIPS 180-4 / NIST CSRC "SHA256.pdf" example values (one block, two blocks), plus the
  // empty string and the one-million-'a' vector (NIST SHA test vectors).
  CHECK(ToHex(Sha256Of("abc")) ==
        "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad");
  CHECK(ToHex(Sha256Of("abcdbcdecdefdefgefghfghighijhijkijkljklmklmnlmnomnopnopq")) ==
        "248d6a61d20638b8e5c026930c3e6039a33ce45964ff2167f6ecedd419db06c1");
  CHECK(ToHex(Sha256Of("")) ==
        "e3b0c44298fc1c149afbf4c8996fb92427ae41e4649b934ca495991b7852b855");
  CHECK(ToHex(Sha256Of(std::string(1'000'000, 'a'))) ==
        "cdc76e5c9914fb9281a1c7e284d73e67f1809a48a497200e046d39ccc7112cd0");
}

TEST_CASE("Sha256IncrementalUpdatesEqualOneShot") {
  // Split points across the 64-byte block and the 56-byte padding boundary.
  std::string message(200, 'x');
  for (size_t i = 0; i < message.size(); ++i) message[i] = static_cast<char>('a' + i % 26);
  for (size_t split : {0u, 1u, 55u, 56u, 63u, 64u, 65u, 119u, 120u, 200u}) {
    Sha256 sha;
    sha.Update(std::string_view(message).substr(0, split));
    sha.Update(std::string_view(message).substr(split));
    CHECK(ToHex(sha.Finish()) == ToHex(Sha256Of(message)));
  }
}

TEST_CASE("HmacSha256MatchesRfc4231") {
  // RFC 4231, test cases 1, 2 and 6 (key longer than the block size).
  CHECK(ToHex(HmacSha256(std::string(20, '\x0b'), "Hi There")) ==
        "b0344c61d8db38535ca8afceaf0bf12b881dc200c9833da726e9376c2e32cff7");
  CHECK(ToHex(HmacSha256("Jefe", "what do ya want for nothing?")) ==
        "5bdcc146bf60754e6a042426089575c75a003f089d2739839dec58b964ec3843");
  CHECK(ToHex(HmacSha256(std::string(131, '\xaa'),
                         "Test Using Larger Than Block-Size Key - Hash Key First")) ==
        "60e431591ee0b67f0d8a26aacbf5b77f8e0bc6213728c5140546040f0ee37f54");
}

TEST_CASE("StaffPseudonymsAreStablePerKeyAndDifferAcrossKeys") {
  std::array<uint8_t, 32> key_a{}, key_b{};
  for (int i = 0; i < 32; ++i) {
    key_a[i] = static_cast<uint8_t>(i);
    key_b[i] = static_cast<uint8_t>(255 - i);
  }
  std::string a1 = StaffPseudonym(key_a, "RT-07");
  CHECK(a1 == StaffPseudonym(key_a, "RT-07"));
  CHECK(a1 != StaffPseudonym(key_b, "RT-07"));
  CHECK(a1 != StaffPseudonym(key_a, "RT-08"));
  CHECK(a1.rfind("STAFF-", 0) == 0);
  CHECK(a1.size() == 12);
  // Independent computation: the first three bytes of HMAC-SHA256(key, "staff:RT-07").
  std::string key_text(reinterpret_cast<const char*>(key_a.data()), key_a.size());
  std::string hex = ToHex(HmacSha256(key_text, "staff:RT-07")).substr(0, 6);
  for (char& c : hex) c = static_cast<char>(std::toupper(static_cast<unsigned char>(c)));
  CHECK(a1 == "STAFF-" + hex);
  CHECK(StaffPseudonym(key_a, "") == "STAFF-UNKNOWN");
}
