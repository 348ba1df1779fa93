#include "common/sha256.h"

#include <string>

#include "gtest/gtest.h"

namespace skerry {
namespace {

std::string Hex(absl::string_view data) {
  Sha256 h;
  h.Update(data);
  return h.FinishHex();
}

// Test vectors: FIPS 180-2, Appendix B ("abc" and the 448-bit message), and the
// digest of the empty string (common practice; from memory).
TEST(Sha256Test, MatchesPublishedVectors) {
  EXPECT_EQ(Hex("abc"),
            "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad");
  EXPECT_EQ(Hex("abcdbcdecdefdefgefghfghighijhijkijkljklmklmnlmnomnopnopq"),
            "248d6a61d20638b8e5c026930c3e6039a33ce45964ff2167f6ecedd419db06c1");
  EXPECT_EQ(Hex(""),
            "e3b0c44298fc1c149afbf4c8996fb92427ae41e4649b934ca495991b7852b855");
}

// FIPS 180-2, Appendix B.3: one million repetitions of "a".
TEST(Sha256Test, MillionAsAcrossManyUpdates) {
  Sha256 h;
  const std::string chunk(1000, 'a');
  for (int i = 0; i < 1000; ++i) h.Update(chunk);
  EXPECT_EQ(h.FinishHex(),
            "cdc76e5c9914fb9281a1c7e284d73e67f1809a48a497200e046d39ccc7112cd0");
}

TEST(Sha256Test, SplitUpdatesEqualOneUpdate) {
  const std::string msg(200, 'x');
  Sha256 h;
  for (char c : msg) h.Update(absl::string_view(&c, 1));
  EXPECT_EQ(h.FinishHex(), Hex(msg));
}

}  // namespace
}  // namespace skerry
