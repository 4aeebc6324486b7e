// Roles, passwords and the audit trail's chain, checked against the
// published test vectors of the hash functions it rests on.
#include "controller/audit/audit.hpp"

#include <gtest/gtest.h>
#include <sys/stat.h>

#include <filesystem>
#include <fstream>

namespace veq::controller::audit {
namespace {

TEST(AuditHashes, PublishedTestVectors) {
  // FIPS 180-2, appendix B.1: SHA-256("abc").
  EXPECT_EQ(sha256_hex("abc"), "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad");
  // RFC 4231, test case 2: HMAC-SHA-256 with key "Jefe".
  const std::string jefe = "Jefe";
  EXPECT_EQ(hmac_sha256_hex({jefe.begin(), jefe.end()}, "what do ya want for nothing?"),
            "5bdcc146bf60754e6a042426089575c75a003f089d2739839dec58b964ec3843");
  // RFC 7914, section 12, second vector: scrypt("password", "NaCl",
  // N = 1024, r = 8, p = 16, 64 bytes).
  const std::string salt = "NaCl";
  auto key = scrypt("password", {salt.begin(), salt.end()}, 1024, 8, 16, 64);
  ASSERT_TRUE(key);
  static constexpr unsigned char kExpected[] = {
      0xfd, 0xba, 0xbe, 0x1c, 0x9d, 0x34, 0x72, 0x00, 0x78, 0x56, 0xe7, 0x19, 0x0d,
      0x01, 0xe9, 0xfe, 0x7c, 0x6a, 0xd7, 0xcb, 0xc8, 0x23, 0x78, 0x30, 0xe7, 0x73,
      0x76, 0x63, 0x4b, 0x37, 0x31, 0x62, 0x2e, 0xaf, 0x30, 0xd9, 0x2e, 0x22, 0xa3,
      0x88, 0x6f, 0xf1, 0x09, 0x27, 0x9d, 0x98, 0x30, 0xda, 0xc7, 0x27, 0xaf, 0xb9,
      0x4a, 0x83, 0xee, 0x6d, 0x83, 0x60, 0xcb, 0xdf, 0xa2, 0xcc, 0x06, 0x40};
  EXPECT_EQ(*key, std::vector<std::uint8_t>(std::begin(kExpected), std::end(kExpected)));
}

TEST(AuditRoles, WhoMayDoWhat) {
  EXPECT_TRUE(allowed(Role::analyst, Permission::run_titrations));
  EXPECT_FALSE(allowed(Role::analyst, Permission::sign_off));
  EXPECT_TRUE(allowed(Role::reviewer, Permission::sign_off));
  EXPECT_FALSE(allowed(Role::reviewer, Permission::change_methods));
  EXPECT_TRUE(allowed(Role::administrator, Permission::change_methods));
  EXPECT_TRUE(allowed(Role::administrator, Permission::manage_users));
  EXPECT_EQ(role_from_name("reviewer"), Role::reviewer);
  EXPECT_FALSE(role_from_name("boss"));
  EXPECT_TRUE(validate_user_name("a.chemist_2"));
  auto bad = validate_user_name("a chemist");
  ASSERT_FALSE(bad);
  EXPECT_NE(bad.error().message.find("character 2"), std::string::npos);
}

TEST(AuditPasswords, SaltedHashes) {
  // The smallest cost keeps the test fast; the format records it.
  const PasswordCost cheap{10, 8, 1};
  auto first = hash_password("titration-42", cheap);
  auto second = hash_password("titration-42", cheap);
  ASSERT_TRUE(first && second);
  EXPECT_NE(*first, *second) << "each hash has its own salt";
  EXPECT_EQ(first->rfind("scrypt$10$8$1$", 0), 0u);
  EXPECT_TRUE(verify_password("titration-42", *first));
  EXPECT_TRUE(verify_password("titration-42", *second));
  EXPECT_FALSE(verify_password("titration-43", *first));
  EXPECT_FALSE(verify_password("titration-42", "scrypt$10$8$1$zz$00"));
  EXPECT_FALSE(verify_password("titration-42", "plain"));
  EXPECT_FALSE(hash_password("short", cheap));
}

std::vector<AuditRecord> sample_trail() {
  std::vector<AuditRecord> trail;
  const char* actions[][4] = {{"ana", "create", "run 1", "new run"},
                              {"ana", "evaluate", "run 1", "derivative"},
                              {"rev", "change", "result 1", "evaluation 2"},
                              {"rev", "sign off", "result 1", "signed"}};
  for (const auto& a : actions) {
    AuditRecord r;
    r.at_utc = "2026-12-02T06:00:00.000Z";
    r.user = a[0];
    r.action = a[1];
    r.subject = a[2];
    r.new_value = a[3];
    r.reason = "demo";
    chain(r, trail.empty() ? nullptr : &trail.back());
    trail.push_back(r);
  }
  return trail;
}

TEST(AuditChain, IntactAndEveryKindOfTampering) {
  const std::vector<std::uint8_t> key(32, 7), other_key(32, 8);
  auto trail = sample_trail();
  const std::string tag = head_tag(key, 4, trail.back().hash);
  EXPECT_TRUE(verify(trail, 4, tag, key).intact);
  EXPECT_TRUE(verify({}, 0, "", key).intact);

  // A changed value: the record names itself.
  auto changed = trail;
  changed[1].new_value = "gran";
  auto v = verify(changed, 4, tag, key);
  EXPECT_FALSE(v.intact);
  EXPECT_EQ(v.first_bad_sequence, 2);
  EXPECT_NE(v.problem.find("record 2"), std::string::npos) << v.problem;

  // A changed record whose hash was recomputed: the next one no longer
  // follows it.
  changed[1].hash = record_hash(changed[1]);
  v = verify(changed, 4, tag, key);
  EXPECT_EQ(v.first_bad_sequence, 3);

  // The whole chain recomputed from record 2 on, without the key: the head
  // does not fit.
  for (std::size_t i = 1; i < changed.size(); ++i)
    chain(changed[i], &changed[i - 1]);
  v = verify(changed, 4, tag, key);
  EXPECT_FALSE(v.intact);
  EXPECT_NE(v.problem.find("keyed head"), std::string::npos) << v.problem;
  // ... and a head made with another key does not fit either.
  EXPECT_FALSE(verify(changed, 4, head_tag(other_key, 4, changed.back().hash), key).intact);

  // A removed record in the middle, and the last record cut off.
  auto removed = trail;
  removed.erase(removed.begin() + 2);
  EXPECT_EQ(verify(removed, 4, tag, key).first_bad_sequence, 3);
  auto cut = trail;
  cut.pop_back();
  v = verify(cut, 4, tag, key);
  EXPECT_FALSE(v.intact);
  EXPECT_NE(v.problem.find("removed from the end"), std::string::npos) << v.problem;
}

TEST(AuditKey, CreatedPrivateAndReadBack) {
  const auto dir = std::filesystem::temp_directory_path() / "veq-audit-key-test";
  std::filesystem::remove_all(dir);
  std::filesystem::create_directories(dir);
  const auto path = dir / "lab.db.audit-key";
  EXPECT_FALSE(load_key(path, false));
  auto created = load_key(path, true);
  ASSERT_TRUE(created) << created.error().message;
  EXPECT_EQ(created->size(), 32u);
  struct stat info {};
  ASSERT_EQ(::stat(path.c_str(), &info), 0);
  EXPECT_EQ(info.st_mode & 0777, 0600u);
  auto again = load_key(path, true);
  ASSERT_TRUE(again);
  EXPECT_EQ(*again, *created);
  ::chmod(path.c_str(), 0644);
  auto open = load_key(path, false);
  ASSERT_FALSE(open);
  EXPECT_NE(open.error().message.find("chmod 600"), std::string::npos);
  ::chmod(path.c_str(), 0600);
  std::ofstream(path) << "not hex\n";
  EXPECT_FALSE(load_key(path, false));
  std::filesystem::remove_all(dir);
}

}  // namespace
}  // namespace veq::controller::audit
