// The audit trail in the store: users and roles, sign-off with the password
// entered again, the evaluation a result uses, and tampering with the file
// found by `verify` and named by its record.
#include "controller/store/audit_trail.hpp"

#include <gtest/gtest.h>

#include <filesystem>

#include "controller/store/sqlite_store.hpp"
#include "tests/controller/raw_sql.hpp"

namespace veq::store {
namespace {

namespace fs = std::filesystem;
using controller::audit::Role;

struct Files {
  fs::path dir;
  Files() {
    dir = fs::temp_directory_path() /
          ("veq-audit-trail-test-" +
           std::string(::testing::UnitTest::GetInstance()->current_test_info()->name()));
    fs::remove_all(dir);
    fs::create_directories(dir);
  }
  ~Files() { fs::remove_all(dir); }
  std::string db() const { return (dir / "lab.sqlite").string(); }
  std::string key() const { return (dir / "lab.sqlite.audit-key").string(); }
};

using veq::store::testing::exec_raw;

// A run with two evaluations, stored the ordinary way.
std::int64_t stored_run(const std::string& path) {
  auto store = SqliteStore::open(path).value();
  NewRun r;
  r.sample_id = "tap water 3";
  r.method_name = "hardness";
  r.method_json = "{}";
  r.sample_volume_ml = 50.0;
  r.titrant_name = "EDTA";
  r.titrant_conc_mol_per_l = 0.01;
  const std::int64_t id = store->begin_run(r).value();
  for (const char* method : {"derivative", "gran"}) {
    EvaluationRecord e;
    e.method = method;
    e.options_json = "{}";
    e.endpoints.push_back(EndpointRecord{12.5, 0.01, 0.0, 0.0, ""});
    (void)store->add_evaluation(id, e).value();
  }
  return id;
}

TEST(AuditTrail, UsersRolesSignOffAndChoices) {
  Files f;
  const std::int64_t run = stored_run(f.db());
  auto trail = AuditTrail::open(f.db(), f.key(), true);
  ASSERT_TRUE(trail) << trail.error().message;
  auto& t = **trail;
  t.set_password_cost({10, 8, 1});  // the smallest cost: fast tests
  // The first user must be an administrator.
  EXPECT_FALSE(t.add_user("", "", "ana", Role::analyst, "analyst-pass"));
  ASSERT_TRUE(t.add_user("", "", "admin", Role::administrator, "admin-pass-1"));
  // Later users need an administrator's password.
  EXPECT_FALSE(t.add_user("admin", "wrong-pass", "ana", Role::analyst, "analyst-pass"));
  ASSERT_TRUE(t.add_user("admin", "admin-pass-1", "ana", Role::analyst, "analyst-pass"));
  ASSERT_TRUE(t.add_user("admin", "admin-pass-1", "rev", Role::reviewer, "reviewer-pass"));
  EXPECT_FALSE(t.add_user("ana", "analyst-pass", "eve", Role::administrator, "eve-password"));
  EXPECT_EQ(t.authenticate("rev", "reviewer-pass").value(), Role::reviewer);
  auto wrong = t.authenticate("rev", "nope-nope");
  ASSERT_FALSE(wrong);
  EXPECT_EQ(wrong.error().message, t.authenticate("nobody", "nope-nope").error().message)
      << "an unknown user and a wrong password get the same answer";

  // An analyst may not sign off; a reviewer must give the password.
  auto analyst = t.sign_off("ana", "analyst-pass", run, "approved");
  ASSERT_FALSE(analyst);
  EXPECT_NE(analyst.error().message.find("may not sign"), std::string::npos);
  EXPECT_FALSE(t.sign_off("rev", "wrong-pass", run, "approved"));
  auto signed_off = t.sign_off("rev", "reviewer-pass", run, "approved");
  ASSERT_TRUE(signed_off) << signed_off.error().message;
  EXPECT_EQ(t.sign_offs(run).value().size(), 1u);

  // Choosing another evaluation needs a reason, and is recorded with the
  // old and new choice.
  EXPECT_FALSE(t.choose_evaluation("ana", "analyst-pass", run, 2, ""));
  ASSERT_TRUE(t.choose_evaluation("ana", "analyst-pass", run, 2, "Gran: weak break"));
  ASSERT_TRUE(t.choose_evaluation("ana", "analyst-pass", run, 1, "back to the derivative"));
  EXPECT_FALSE(t.choose_evaluation("ana", "analyst-pass", run, 99, "no such evaluation"));
  auto choice = t.evaluation_choice(run).value();
  ASSERT_TRUE(choice);
  EXPECT_EQ(choice->evaluation_id, 1);
  EXPECT_EQ(choice->reason, "back to the derivative");

  auto records = t.records().value();
  ASSERT_EQ(records.size(), 6u);  // 3 users, 1 sign-off, 2 choices
  EXPECT_EQ(records[5].old_value, "evaluation 2");
  EXPECT_EQ(records[5].new_value, "evaluation 1");
  EXPECT_EQ(records[3].action, "sign off");
  EXPECT_TRUE(t.verify().value().intact);
}

TEST(AuditTrail, TamperingIsFoundAndNamed) {
  Files f;
  const std::int64_t run = stored_run(f.db());
  {
    auto t = AuditTrail::open(f.db(), f.key(), true).value();
    t->set_password_cost({10, 8, 1});
    ASSERT_TRUE(t->add_user("", "", "admin", Role::administrator, "admin-pass-1"));
    for (int i = 0; i < 4; ++i)
      ASSERT_TRUE(t->append("admin", "change", "run " + std::to_string(run), "a", "b", "test"));
  }
  // The database refuses edits of the trail...
  std::string error;
  EXPECT_NE(exec_raw(f.db(), "UPDATE audit_records SET new_value = 'x' WHERE sequence = 3", &error),
            SQLITE_OK);
  EXPECT_NE(error.find("cannot be changed"), std::string::npos) << error;
  EXPECT_NE(exec_raw(f.db(), "DELETE FROM audit_records WHERE sequence = 2"), SQLITE_OK);
  // ... but someone with the file can drop the trigger and edit anyway.
  ASSERT_EQ(exec_raw(f.db(),
                     "DROP TRIGGER audit_records_are_unchangeable;"
                     "UPDATE audit_records SET new_value = 'x' WHERE sequence = 3"),
            SQLITE_OK);
  {
    auto t = AuditTrail::open(f.db(), f.key(), false).value();
    auto v = t->verify().value();
    EXPECT_FALSE(v.intact);
    EXPECT_EQ(v.first_bad_sequence, 3);
  }
  // Recomputing every hash from record 3 on does not help without the key.
  {
    auto t = AuditTrail::open(f.db(), f.key(), false).value();
    auto all = t->records().value();
    for (std::size_t i = 2; i < all.size(); ++i)
      controller::audit::chain(all[i], &all[i - 1]);
    for (std::size_t i = 2; i < all.size(); ++i) {
      const std::string sql = "UPDATE audit_records SET previous_hash = '" + all[i].previous_hash +
                              "', hash = '" + all[i].hash +
                              "' WHERE sequence = " + std::to_string(all[i].sequence);
      ASSERT_EQ(exec_raw(f.db(), sql.c_str()), SQLITE_OK);
    }
    auto v = t->verify().value();
    EXPECT_FALSE(v.intact);
    EXPECT_NE(v.problem.find("keyed head"), std::string::npos) << v.problem;
  }
  // Opening with a missing key file is an error naming it.
  auto no_key = AuditTrail::open(f.db(), (f.dir / "elsewhere.key").string(), false);
  ASSERT_FALSE(no_key);
  EXPECT_NE(no_key.error().message.find("elsewhere.key"), std::string::npos);
}

TEST(AuditTrail, RefusesAForeignFileWithoutTouchingIt) {
  Files f;
  ASSERT_EQ(exec_raw(f.db(), "CREATE TABLE notes (text TEXT); INSERT INTO notes VALUES ('mine')"),
            SQLITE_OK);
  const auto before = fs::file_size(f.db());
  const auto time_before = fs::last_write_time(f.db());
  EXPECT_FALSE(AuditTrail::open(f.db(), f.key(), true));
  EXPECT_EQ(fs::file_size(f.db()), before);
  EXPECT_EQ(fs::last_write_time(f.db()), time_before);
}

}  // namespace
}  // namespace veq::store
