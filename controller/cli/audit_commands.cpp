// `veq user add`, `veq sign-off`, `veq choose-evaluation` and `veq audit
// verify|list`: users, signatures and the tamper-evident audit trail.
#include <algorithm>
#include <cstdio>
#include <iostream>
#include <string>
#include <vector>

#include "controller/audit/audit.hpp"
#include "controller/cli/cli_support.hpp"
#include "controller/cli/commands.hpp"
#include "controller/evaluation_results.hpp"
#include "controller/store/audit_trail.hpp"
#include "controller/store/sqlite_store.hpp"

namespace veq::cli {

namespace {

struct AuditOptions {
  std::string db = store::default_database_path();
  std::string key;  // empty: beside the database, or $VEQ_AUDIT_KEY
  std::string user;
  std::string name;
  std::string role = "analyst";
  std::string meaning = "reviewed and approved";
  std::string reason;
  std::int64_t run_id = 0;
  std::int64_t series_id = 0;
  std::int64_t evaluation_id = 0;
};

std::string key_path(const AuditOptions& o) {
  return o.key.empty() ? controller::audit::default_key_path(o.db).string() : o.key;
}

std::unique_ptr<store::AuditTrail> open_trail(const AuditOptions& o, bool create_key) {
  auto t = store::AuditTrail::open(o.db, key_path(o), create_key);
  if (!t)
    throw CLI::Error("AuditError", t.error().message, 2);
  return std::move(t).value();
}

void fail_on(const veq::Result<void>& r) {
  if (!r)
    throw CLI::Error("AuditError", r.error().message, 2);
}

}  // namespace

void add_audit_commands(CLI::App& app) {
  auto o = std::make_shared<AuditOptions>();
  auto add_db = [&](CLI::App* c) {
    c->add_option("--db", o->db, "SQLite store")->capture_default_str();
    c->add_option("--key", o->key,
                  "audit key file (default: <db>.audit-key beside the store, or $VEQ_AUDIT_KEY)");
  };

  auto* user = app.add_subcommand("user", "users of a store and their roles");
  user->require_subcommand(1);
  auto* add = user->add_subcommand(
      "add",
      "add a user; the first one must be an administrator. Passwords are read from standard "
      "input: the acting administrator's first (not for the first user), then the new user's");
  add_db(add);
  add->add_option("--name", o->name, "the new user's name")->required();
  add->add_option("--role", o->role, "analyst, reviewer or administrator")->capture_default_str();
  add->add_option("--by", o->user, "the administrator adding the user (not for the first one)");
  add->callback([o] {
    const auto role = controller::audit::role_from_name(o->role);
    if (!role)
      throw CLI::ValidationError("--role", "must be analyst, reviewer or administrator");
    auto trail = open_trail(*o, true);
    std::string by_password;
    if (!o->user.empty())
      by_password = read_password("password of " + o->user);
    const std::string password = read_password("new password for " + o->name);
    fail_on(trail->add_user(o->user, by_password, o->name, *role, password));
    std::printf("user %s added as %s\n", o->name.c_str(), o->role.c_str());
  });

  auto* sign = app.add_subcommand(
      "sign-off",
      "a reviewer signs a run's results off, or every run of a series (password read from "
      "standard input)");
  add_db(sign);
  auto* run_option = sign->add_option("--run", o->run_id, "run number");
  auto* series_option = sign->add_option(
      "--series", o->series_id,
      "series number (veq series list): signs off every titration its entries rest on, "
      "back-titrations included, one audit record each");
  run_option->excludes(series_option);
  sign->add_option("--user", o->user, "the reviewer")->required();
  sign->add_option("--meaning", o->meaning, "what the signature means")->capture_default_str();
  sign->callback([o] {
    if (o->run_id <= 0 && o->series_id <= 0)
      throw CLI::ValidationError("sign-off", "give --run ID or --series ID");
    std::vector<std::int64_t> runs;
    if (o->run_id > 0) {
      runs.push_back(o->run_id);
    } else {
      auto store = open_store_or_throw(o->db);
      auto series = store->load_series(o->series_id);
      if (!series)
        throw CLI::Error("AuditError", series.error().message, 2);
      auto entries = store->load_entries(o->series_id);
      if (!entries)
        throw CLI::Error("AuditError", entries.error().message, 2);
      for (const auto& e : *entries) {
        auto determinations = store->load_determinations(e.id);
        if (!determinations)
          throw CLI::Error("AuditError", determinations.error().message, 2);
        for (const auto& d : *determinations)
          for (const std::int64_t id : {d.run_id, d.second_run_id})
            if (id > 0 && std::find(runs.begin(), runs.end(), id) == runs.end())
              runs.push_back(id);
      }
      if (runs.empty()) {
        throw CLI::Error("AuditError",
                         "series " + std::to_string(o->series_id) + " has no titration to sign off",
                         2);
      }
    }
    auto trail = open_trail(*o, false);
    const std::string password = read_password("password of " + o->user);
    for (const std::int64_t run : runs) {
      auto s = trail->sign_off(o->user, password, run, o->meaning);
      if (!s)
        throw CLI::Error("AuditError", "run " + std::to_string(run) + ": " + s.error().message, 2);
      std::printf("run %lld signed off by %s at %s (%s), audit record %lld\n",
                  static_cast<long long>(run), s->reviewer.c_str(), s->signed_utc.c_str(),
                  s->meaning.c_str(), static_cast<long long>(s->audit_sequence));
    }
    if (o->series_id > 0)
      std::printf("series %lld: %zu runs signed off\n", static_cast<long long>(o->series_id),
                  runs.size());
  });

  auto* choose = app.add_subcommand(
      "choose-evaluation",
      "choose the evaluation a run's results use, with a reason (password from standard input)");
  add_db(choose);
  choose->add_option("--run", o->run_id, "run number")->required();
  choose->add_option("--evaluation", o->evaluation_id, "evaluation number (veq show)")->required();
  choose->add_option("--user", o->user, "who chooses")->required();
  choose->add_option("--reason", o->reason, "why")->required();
  choose->callback([o] {
    auto trail = open_trail(*o, false);
    const std::string password = read_password("password of " + o->user);
    fail_on(trail->choose_evaluation(o->user, password, o->run_id, o->evaluation_id, o->reason));
    std::printf("run %lld now uses evaluation %lld\n", static_cast<long long>(o->run_id),
                static_cast<long long>(o->evaluation_id));
    // Its results, as new records beside those of the earlier choice.
    auto store = open_store_or_throw(o->db);
    auto results = controller::add_results_for_evaluation(*store, o->run_id, o->evaluation_id);
    if (!results)
      throw CLI::Error("AuditError", results.error().message, 2);
    for (const auto& r : *results)
      std::printf("  %-26s %12.6g %s (evaluation %lld)\n", r.name.c_str(), r.value, r.unit.c_str(),
                  static_cast<long long>(r.evaluation_id));
  });

  auto* audit = app.add_subcommand("audit", "the tamper-evident audit trail");
  audit->require_subcommand(1);
  auto* verify = audit->add_subcommand(
      "verify", "check every record's hash chain and the keyed head; exit status 3 if broken");
  add_db(verify);
  verify->callback([o] {
    auto trail = open_trail(*o, false);
    auto v = trail->verify();
    if (!v)
      throw CLI::Error("AuditError", v.error().message, 2);
    if (v->intact) {
      std::printf("audit trail intact: %zu records, head signed with %s\n", v->records,
                  key_path(*o).c_str());
      return;
    }
    std::printf("audit trail BROKEN at record %lld: %s\n",
                static_cast<long long>(v->first_bad_sequence.value_or(0)), v->problem.c_str());
    throw CLI::RuntimeError(3);
  });
  auto* list = audit->add_subcommand("list", "every record of the audit trail");
  add_db(list);
  list->callback([o] {
    auto trail = open_trail(*o, false);
    auto records = trail->records();
    if (!records)
      throw CLI::Error("AuditError", records.error().message, 2);
    std::printf("%6s  %-24s  %-12s  %-10s  %-28s  %s\n", "record", "when (UTC)", "user", "action",
                "subject", "old -> new (reason)");
    for (const auto& r : *records) {
      std::printf("%6lld  %-24s  %-12s  %-10s  %-28s  %s -> %s (%s)\n",
                  static_cast<long long>(r.sequence), r.at_utc.c_str(), r.user.c_str(),
                  r.action.c_str(), r.subject.c_str(), r.old_value.c_str(), r.new_value.c_str(),
                  r.reason.c_str());
    }
  });
}

}  // namespace veq::cli
