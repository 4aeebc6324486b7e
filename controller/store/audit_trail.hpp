// Users, sign-off, the choice of evaluation behind a result, and the
// tamper-evident audit trail, kept in the veq store's SQLite file (schema 4,
// see sqlite_store.cpp). The chain's key lives in a file outside the
// database (controller/audit/audit.hpp).
#pragma once

#include <cstdint>
#include <memory>
#include <optional>
#include <string>
#include <vector>

#include "common/result.hpp"
#include "controller/audit/audit.hpp"

namespace veq::store {

class SqliteStore;

/// A reviewer's signature on a run's results.
struct SignOff {
  std::int64_t id = 0;
  std::int64_t run_id = 0;
  std::string reviewer;
  std::string meaning;  ///< e.g. "reviewed and approved"
  std::string signed_utc;
  std::int64_t audit_sequence = 0;  ///< the audit record that holds it
};

/// The evaluation a run's results use, and who chose it and why.
struct EvaluationChoice {
  std::int64_t run_id = 0;
  std::int64_t evaluation_id = 0;
  std::string user;
  std::string reason;
  std::string chosen_utc;
};

class AuditTrail {
 public:
  /// Opens the trail of the store at `database` (migrating it with the
  /// store's own checks: a foreign or newer file is refused and left
  /// alone) with the key from `key_path`, created if `create_key` and
  /// absent. Errors name the file.
  static veq::Result<std::unique_ptr<AuditTrail>> open(const std::string& database,
                                                       const std::string& key_path,
                                                       bool create_key);
  ~AuditTrail();
  AuditTrail(const AuditTrail&) = delete;
  AuditTrail& operator=(const AuditTrail&) = delete;

  /// Adds a user. The first user of a store must be an administrator and
  /// needs no one's approval; later users are added by an administrator
  /// who gives a password. Recorded in the trail.
  veq::Result<void> add_user(const std::string& by, const std::string& by_password,
                             const std::string& name, controller::audit::Role role,
                             const std::string& password);

  /// Cost of the password hashes made from now on (default: the one of
  /// controller::audit::PasswordCost). Tests lower it to stay fast.
  void set_password_cost(const controller::audit::PasswordCost& cost) { cost_ = cost; }

  /// The user's role when the password is right; an error that does not
  /// say which of the two was wrong otherwise.
  veq::Result<controller::audit::Role> authenticate(const std::string& name,
                                                    const std::string& password);

  /// Appends a record, chained to the last one, and re-signs the head, in
  /// one transaction.
  veq::Result<controller::audit::AuditRecord> append(
      const std::string& user, const std::string& action, const std::string& subject,
      const std::string& old_value, const std::string& new_value, const std::string& reason);

  /// A reviewer's sign-off of a run, with the password entered again.
  veq::Result<SignOff> sign_off(const std::string& reviewer, const std::string& password,
                                std::int64_t run_id, const std::string& meaning);
  veq::Result<std::vector<SignOff>> sign_offs(std::int64_t run_id);

  /// Chooses the evaluation a run's results use; a reason is required, the
  /// user needs the evaluate permission and the password. Recorded.
  veq::Result<void> choose_evaluation(const std::string& user, const std::string& password,
                                      std::int64_t run_id, std::int64_t evaluation_id,
                                      const std::string& reason);
  /// The latest choice for a run, if any was made.
  veq::Result<std::optional<EvaluationChoice>> evaluation_choice(std::int64_t run_id);

  veq::Result<std::vector<controller::audit::AuditRecord>> records();
  /// Checks the chain and its keyed head.
  veq::Result<controller::audit::Verification> verify();

 private:
  AuditTrail(std::unique_ptr<SqliteStore> store, std::vector<std::uint8_t> key);
  veq::Result<controller::audit::AuditRecord> append_locked(
      const std::string& user, const std::string& action, const std::string& subject,
      const std::string& old_value, const std::string& new_value, const std::string& reason);
  veq::Result<void> exec(const char* sql);
  veq::Error storage_error(const std::string& what) const;

  std::unique_ptr<SqliteStore> store_;  ///< its connection, checks and settings
  std::vector<std::uint8_t> key_;
  controller::audit::PasswordCost cost_;
};

}  // namespace veq::store
