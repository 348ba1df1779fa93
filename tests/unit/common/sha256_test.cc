#include "common/sha256.h"

#include <string>

#include "absl/strings/escaping.h"
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

// NIST CAVP, SHA Validation System test vectors, file SHA256ShortMsg.rsp
// ("CAVS 11.0, SHA-256 ShortMsg", byte-oriented): Len = 0, 8, 16 and 24.
TEST(Sha256Test, MatchesNistShortMessageVectors) {
  struct Vector {
    const char* msg_hex;
    const char* md;
  };
  const Vector kVectors[] = {
      {"", "e3b0c44298fc1c149afbf4c8996fb92427ae41e4649b934ca495991b7852b855"},
      {"d3",
       "28969cdfa74a12c82f3bad960b0b000aca2ac329deea5c2328ebc6f2ba9802c1"},
      {"11af",
       "5ca7133fa735326081558ac312c620eeca9970d1e70a4b95533d956f072d1f98"},
      {"b4190e",
       "dff2e73091f6c05e528896c4c831b9448653dc2ff043528f6769437bc7b975c2"},
  };
  for (const Vector& v : kVectors) {
    SCOPED_TRACE(v.msg_hex);
    EXPECT_EQ(Hex(absl::HexStringToBytes(v.msg_hex)), v.md);
  }
}

// FIPS 180-2, Appendix B.3: one million repetitions of "a".
TEST(Sha256Test, MillionAsAcrossManyUpdates) {
  Sha256 h;
  const std::string chunk(1000, 'a');
  for (int i = 0; i < 1000; ++i) h.Update(chunk);
  EXPECT_EQ(h.FinishHex(),
            "cdc76e5c9914fb9281a1c7e284d73e67f1809a48a497200e046d39ccc7112cd0");
}

// The same vector through pieces of every size around the internal buffer
// (512 bytes) and OpenSSL's block (64 bytes), so that gathering small updates
// and passing large ones straight through agree.
TEST(Sha256Test, MillionAsInPiecesOfAnySize) {
  for (size_t piece : {1u, 3u, 8u, 63u, 64u, 65u, 511u, 512u, 513u, 4096u}) {
    SCOPED_TRACE(piece);
    Sha256 h;
    const std::string chunk(piece, 'a');
    size_t left = 1000000;
    while (left > 0) {
      const size_t n = left < piece ? left : piece;
      h.Update(absl::string_view(chunk.data(), n));
      left -= n;
    }
    EXPECT_EQ(
        h.FinishHex(),
        "cdc76e5c9914fb9281a1c7e284d73e67f1809a48a497200e046d39ccc7112cd0");
  }
}

TEST(Sha256Test, SplitUpdatesEqualOneUpdate) {
  const std::string msg(2000, 'x');
  Sha256 h;
  for (char c : msg) h.Update(absl::string_view(&c, 1));
  EXPECT_EQ(h.FinishHex(), Hex(msg));
}

TEST(Sha256Test, IntegersAreHashedLittleEndian) {
  Sha256 h;
  h.UpdateU32(0x64636261u);            // "abcd"
  h.UpdateU64(0x6c6b6a6968676665ull);  // "efghijkl"
  EXPECT_EQ(h.FinishHex(), Hex("abcdefghijkl"));
}

}  // namespace
}  // namespace skerry
