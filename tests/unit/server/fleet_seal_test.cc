// Tests for the worker secrets and lease proofs (server/auth/fleet_seal.h).
#include "server/auth/fleet_seal.h"

#include <string>

#include "absl/strings/escaping.h"
#include "gtest/gtest.h"

namespace skerry::auth {
namespace {

std::string Hex(const std::array<uint8_t, 32>& a) {
  return absl::BytesToHexString(
      absl::string_view(reinterpret_cast<const char*>(a.data()), a.size()));
}

// RFC 4231 ("Identifiers and Test Vectors for HMAC-SHA-224, HMAC-SHA-256,
// HMAC-SHA-384, and HMAC-SHA-512"), section 4, HMAC-SHA-256 outputs of test
// cases 1, 2 and 6 (a key longer than the block); the same values from Python
// 3's hmac module.
TEST(HmacSha256Test, MatchesTheRfc4231TestVectors) {
  EXPECT_EQ(Hex(HmacSha256(std::string(20, '\x0b'), "Hi There")),
            "b0344c61d8db38535ca8afceaf0bf12b881dc200c9833da726e9376c2e32cff7");
  EXPECT_EQ(Hex(HmacSha256("Jefe", "what do ya want for nothing?")),
            "5bdcc146bf60754e6a042426089575c75a003f089d2739839dec58b964ec3843");
  EXPECT_EQ(
      Hex(HmacSha256(std::string(131, '\xaa'),
                     "Test Using Larger Than Block-Size Key - Hash Key First")),
      "60e431591ee0b67f0d8a26aacbf5b77f8e0bc6213728c5140546040f0ee37f54");
}

TEST(FleetSealTest, SecretsAndProofsNameWhatTheyCover) {
  const FleetSeal seal(std::string(32, 'k'));
  const FleetSeal other(std::string(32, 'q'));
  const std::string secret = seal.WorkerSecret(5);
  EXPECT_EQ(secret.size(), 32u);
  EXPECT_TRUE(seal.IsWorkerSecret(5, secret));
  // The same key after a restart gives the same secret.
  EXPECT_TRUE(FleetSeal(std::string(32, 'k')).IsWorkerSecret(5, secret));
  EXPECT_FALSE(seal.IsWorkerSecret(6, secret)) << "another worker's id";
  EXPECT_FALSE(other.IsWorkerSecret(5, secret)) << "another database's key";
  EXPECT_FALSE(seal.IsWorkerSecret(5, "")) << "no secret";
  EXPECT_FALSE(seal.IsWorkerSecret(5, secret.substr(0, 31)));

  const std::string proof = seal.LeaseProof(5, 1000, 2);
  EXPECT_TRUE(seal.IsLeaseProof(5, 1000, 2, proof));
  EXPECT_FALSE(seal.IsLeaseProof(6, 1000, 2, proof)) << "another worker";
  EXPECT_FALSE(seal.IsLeaseProof(5, 1001, 2, proof)) << "another task";
  EXPECT_FALSE(seal.IsLeaseProof(5, 1000, 3, proof)) << "another attempt";
  EXPECT_FALSE(other.IsLeaseProof(5, 1000, 2, proof));
  EXPECT_NE(proof, secret);
}

}  // namespace
}  // namespace skerry::auth
