// The audit trail, users, sign-offs and evaluation choices in the store's
// SQLite file (tables of schema 4, see sqlite_store.cpp).
#include <sqlite3.h>

#include "controller/store/audit_trail.hpp"
#include "controller/store/sqlite_statement.hpp"
#include "controller/store/sqlite_store.hpp"

namespace veq::store {

namespace audit = controller::audit;
using detail::Statement;

veq::Result<std::unique_ptr<AuditTrail>> AuditTrail::open(const std::string& database,
                                                          const std::string& key_path,
                                                          bool create_key) {
  // The store's own opening refuses foreign, newer and damaged files and
  // migrates; the trail then works on its connection.
  auto store = SqliteStore::open(database);
  if (!store)
    return store.error();
  auto key = audit::load_key(key_path, create_key);
  if (!key)
    return key.error();
  return std::unique_ptr<AuditTrail>(new AuditTrail(std::move(*store), std::move(*key)));
}

AuditTrail::AuditTrail(std::unique_ptr<SqliteStore> store, std::vector<std::uint8_t> key)
    : store_(std::move(store)), key_(std::move(key)) {}

AuditTrail::~AuditTrail() = default;

veq::Result<void> AuditTrail::exec(const char* sql) {
  return store_->exec(sql);
}

veq::Error AuditTrail::storage_error(const std::string& what) const {
  return store_->storage_error(what);
}

veq::Result<audit::AuditRecord> AuditTrail::append_locked(
    const std::string& user, const std::string& action, const std::string& subject,
    const std::string& old_value, const std::string& new_value, const std::string& reason) {
  audit::AuditRecord last;
  bool have_last = false;
  {
    Statement s(store_->db_,
                "SELECT sequence, hash FROM audit_records ORDER BY sequence DESC LIMIT 1");
    const int rc = s.step();
    if (rc == SQLITE_ROW) {
      last.sequence = s.integer(0);
      last.hash = s.text(1);
      have_last = true;
    } else if (rc != SQLITE_DONE) {
      return storage_error("cannot read the audit trail");
    }
  }
  audit::AuditRecord r;
  r.at_utc = audit::now_utc();
  r.user = user;
  r.action = action;
  r.subject = subject;
  r.old_value = old_value;
  r.new_value = new_value;
  r.reason = reason;
  audit::chain(r, have_last ? &last : nullptr);
  {
    Statement s(
        store_->db_,
        "INSERT INTO audit_records (sequence, at_utc, user_name, action, subject, old_value, "
        "new_value, reason, previous_hash, hash) VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, "
        "?9, ?10)");
    s.bind(1, r.sequence)
        .bind(2, r.at_utc)
        .bind(3, r.user)
        .bind(4, r.action)
        .bind(5, r.subject)
        .bind(6, r.old_value)
        .bind(7, r.new_value)
        .bind(8, r.reason)
        .bind(9, r.previous_hash)
        .bind(10, r.hash);
    if (s.step() != SQLITE_DONE)
      return storage_error("cannot append to the audit trail");
  }
  {
    Statement s(store_->db_,
                "INSERT INTO audit_head (id, sequence, tag) VALUES (1, ?1, ?2) "
                "ON CONFLICT(id) DO UPDATE SET sequence = excluded.sequence, tag = excluded.tag");
    s.bind(1, r.sequence).bind(2, audit::head_tag(key_, r.sequence, r.hash));
    if (s.step() != SQLITE_DONE)
      return storage_error("cannot sign the audit trail's head");
  }
  return r;
}

veq::Result<audit::AuditRecord> AuditTrail::append(
    const std::string& user, const std::string& action, const std::string& subject,
    const std::string& old_value, const std::string& new_value, const std::string& reason) {
  const auto serialized = store_->serialize();
  if (auto r = exec("BEGIN IMMEDIATE"); !r)
    return r.error();
  auto record = append_locked(user, action, subject, old_value, new_value, reason);
  if (!record) {
    (void)exec("ROLLBACK");
    return record.error();
  }
  if (auto r = exec("COMMIT"); !r) {
    (void)exec("ROLLBACK");
    return r.error();
  }
  return record;
}

veq::Result<audit::Role> AuditTrail::authenticate(const std::string& name,
                                                  const std::string& password) {
  const auto serialized = store_->serialize();
  Statement s(store_->db_, "SELECT role, password_hash FROM users WHERE name = ?1 AND active = 1");
  s.bind(1, name);
  const int rc = s.step();
  if (rc != SQLITE_ROW && rc != SQLITE_DONE)
    return storage_error("cannot read users");
  // The same answer for an unknown user and a wrong password.
  const veq::Error refused =
      make_error(ErrorKind::invalid_input, "user name or password not accepted");
  if (rc == SQLITE_DONE)
    return refused;
  const auto role = audit::role_from_name(s.text(0));
  if (!role || !audit::verify_password(password, s.text(1)))
    return refused;
  return *role;
}

veq::Result<void> AuditTrail::add_user(const std::string& by, const std::string& by_password,
                                       const std::string& name, audit::Role role,
                                       const std::string& password) {
  const auto serialized = store_->serialize();
  if (auto ok = audit::validate_user_name(name); !ok)
    return ok.error();
  auto hash = audit::hash_password(password, cost_);
  if (!hash)
    return hash.error();
  if (auto r = exec("BEGIN IMMEDIATE"); !r)
    return r.error();
  auto fail = [&](veq::Error e) -> veq::Result<void> {
    (void)exec("ROLLBACK");
    return e;
  };
  std::int64_t users = 0;
  {
    Statement s(store_->db_, "SELECT COUNT(*) FROM users");
    if (s.step() != SQLITE_ROW)
      return fail(storage_error("cannot read users"));
    users = s.integer(0);
  }
  std::string actor = by;
  if (users == 0) {
    if (role != audit::Role::administrator) {
      return fail(make_error(ErrorKind::invalid_input,
                             "the first user of a store must be an administrator"));
    }
    actor = name;
  } else {
    auto who = authenticate(by, by_password);
    if (!who)
      return fail(who.error());
    if (!audit::allowed(*who, audit::Permission::manage_users)) {
      return fail(
          make_error(ErrorKind::invalid_input, "user '" + by + "' (" + audit::role_name(*who) +
                                                   ") may not manage users; an administrator may"));
    }
  }
  {
    Statement s(store_->db_,
                "INSERT INTO users (name, role, password_hash, created_utc) VALUES (?1, ?2, ?3, "
                "?4)");
    s.bind(1, name)
        .bind(2, std::string(audit::role_name(role)))
        .bind(3, *hash)
        .bind(4, audit::now_utc());
    if (s.step() != SQLITE_DONE)
      return fail(storage_error("cannot add user '" + name + "' (does it exist already?)"));
  }
  auto record = append_locked(actor, "create", "user " + name, "", audit::role_name(role),
                              users == 0 ? "first administrator of the store" : "new user");
  if (!record)
    return fail(record.error());
  if (auto r = exec("COMMIT"); !r)
    return fail(r.error());
  return {};
}

veq::Result<SignOff> AuditTrail::sign_off(const std::string& reviewer, const std::string& password,
                                          std::int64_t run_id, const std::string& meaning) {
  const auto serialized = store_->serialize();
  auto role = authenticate(reviewer, password);
  if (!role)
    return role.error();
  if (!audit::allowed(*role, audit::Permission::sign_off)) {
    return make_error(ErrorKind::invalid_input, "user '" + reviewer + "' (" +
                                                    audit::role_name(*role) +
                                                    ") may not sign results off; a reviewer may");
  }
  if (meaning.empty())
    return make_error(ErrorKind::invalid_input, "a sign-off needs its meaning, e.g. 'approved'");
  if (auto r = exec("BEGIN IMMEDIATE"); !r)
    return r.error();
  auto fail = [&](veq::Error e) -> veq::Result<SignOff> {
    (void)exec("ROLLBACK");
    return e;
  };
  {
    Statement s(store_->db_, "SELECT 1 FROM runs WHERE id = ?1");
    s.bind(1, run_id);
    if (s.step() != SQLITE_ROW) {
      return fail(
          make_error(ErrorKind::not_found, "run " + std::to_string(run_id) + " does not exist"));
    }
  }
  auto record = append_locked(reviewer, "sign off", "run " + std::to_string(run_id), "", meaning,
                              "reviewer's signature, password entered again");
  if (!record)
    return fail(record.error());
  SignOff so{0, run_id, reviewer, meaning, record->at_utc, record->sequence};
  {
    Statement s(store_->db_,
                "INSERT INTO sign_offs (run_id, reviewer, meaning, signed_utc, audit_sequence) "
                "VALUES (?1, ?2, ?3, ?4, ?5)");
    s.bind(1, run_id)
        .bind(2, reviewer)
        .bind(3, meaning)
        .bind(4, so.signed_utc)
        .bind(5, so.audit_sequence);
    if (s.step() != SQLITE_DONE)
      return fail(storage_error("cannot store the sign-off"));
    so.id = sqlite3_last_insert_rowid(store_->db_);
  }
  if (auto r = exec("COMMIT"); !r)
    return fail(r.error());
  return so;
}

veq::Result<std::vector<SignOff>> AuditTrail::sign_offs(std::int64_t run_id) {
  const auto serialized = store_->serialize();
  Statement s(store_->db_,
              "SELECT id, run_id, reviewer, meaning, signed_utc, audit_sequence FROM sign_offs "
              "WHERE run_id = ?1 ORDER BY id");
  s.bind(1, run_id);
  std::vector<SignOff> out;
  int rc;
  while ((rc = s.step()) == SQLITE_ROW)
    out.push_back({s.integer(0), s.integer(1), s.text(2), s.text(3), s.text(4), s.integer(5)});
  if (rc != SQLITE_DONE)
    return storage_error("cannot read sign-offs");
  return out;
}

veq::Result<void> AuditTrail::choose_evaluation(const std::string& user,
                                                const std::string& password, std::int64_t run_id,
                                                std::int64_t evaluation_id,
                                                const std::string& reason) {
  const auto serialized = store_->serialize();
  if (reason.empty()) {
    return make_error(ErrorKind::invalid_input,
                      "changing the evaluation a result uses needs a reason");
  }
  auto role = authenticate(user, password);
  if (!role)
    return role.error();
  if (!audit::allowed(*role, audit::Permission::evaluate))
    return make_error(ErrorKind::invalid_input, "user '" + user + "' may not evaluate");
  auto previous = evaluation_choice(run_id);
  if (!previous)
    return previous.error();
  if (auto r = exec("BEGIN IMMEDIATE"); !r)
    return r.error();
  auto fail = [&](veq::Error e) -> veq::Result<void> {
    (void)exec("ROLLBACK");
    return e;
  };
  {
    Statement s(store_->db_, "SELECT 1 FROM evaluations WHERE id = ?1 AND run_id = ?2");
    s.bind(1, evaluation_id).bind(2, run_id);
    if (s.step() != SQLITE_ROW) {
      return fail(make_error(ErrorKind::not_found, "evaluation " + std::to_string(evaluation_id) +
                                                       " is not an evaluation of run " +
                                                       std::to_string(run_id)));
    }
  }
  const std::string old_value =
      *previous ? "evaluation " + std::to_string((*previous)->evaluation_id) : std::string();
  auto record = append_locked(user, "change", "evaluation used by run " + std::to_string(run_id),
                              old_value, "evaluation " + std::to_string(evaluation_id), reason);
  if (!record)
    return fail(record.error());
  {
    Statement s(
        store_->db_,
        "INSERT INTO evaluation_choices (run_id, evaluation_id, user_name, reason, chosen_utc) "
        "VALUES (?1, ?2, ?3, ?4, ?5)");
    s.bind(1, run_id).bind(2, evaluation_id).bind(3, user).bind(4, reason).bind(5, record->at_utc);
    if (s.step() != SQLITE_DONE)
      return fail(storage_error("cannot store the evaluation choice"));
  }
  if (auto r = exec("COMMIT"); !r)
    return fail(r.error());
  return {};
}

veq::Result<std::optional<EvaluationChoice>> AuditTrail::evaluation_choice(std::int64_t run_id) {
  const auto serialized = store_->serialize();
  Statement s(store_->db_,
              "SELECT run_id, evaluation_id, user_name, reason, chosen_utc FROM evaluation_choices "
              "WHERE run_id = ?1 ORDER BY id DESC LIMIT 1");
  s.bind(1, run_id);
  const int rc = s.step();
  if (rc == SQLITE_DONE)
    return std::optional<EvaluationChoice>{};
  if (rc != SQLITE_ROW)
    return storage_error("cannot read evaluation choices");
  return std::optional<EvaluationChoice>{
      EvaluationChoice{s.integer(0), s.integer(1), s.text(2), s.text(3), s.text(4)}};
}

veq::Result<std::vector<audit::AuditRecord>> AuditTrail::records() {
  const auto serialized = store_->serialize();
  Statement s(store_->db_,
              "SELECT sequence, at_utc, user_name, action, subject, old_value, new_value, reason, "
              "previous_hash, hash FROM audit_records ORDER BY sequence");
  std::vector<audit::AuditRecord> out;
  int rc;
  while ((rc = s.step()) == SQLITE_ROW) {
    out.push_back({s.integer(0), s.text(1), s.text(2), s.text(3), s.text(4), s.text(5), s.text(6),
                   s.text(7), s.text(8), s.text(9)});
  }
  if (rc != SQLITE_DONE)
    return storage_error("cannot read the audit trail");
  return out;
}

veq::Result<audit::Verification> AuditTrail::verify() {
  const auto serialized = store_->serialize();
  auto all = records();
  if (!all)
    return all.error();
  std::int64_t head_sequence = 0;
  std::string tag;
  {
    Statement s(store_->db_, "SELECT sequence, tag FROM audit_head WHERE id = 1");
    const int rc = s.step();
    if (rc == SQLITE_ROW) {
      head_sequence = s.integer(0);
      tag = s.text(1);
    } else if (rc != SQLITE_DONE) {
      return storage_error("cannot read the audit trail's head");
    }
  }
  return audit::verify(*all, head_sequence, tag, key_);
}

}  // namespace veq::store
