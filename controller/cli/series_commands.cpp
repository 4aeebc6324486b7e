// `veq series run|check|list|show`, `veq method import|export|list|check` and
// `veq titrant add|list`: series on the simulator, and the lab's methods and
// titrants in the store.
#include <cstdio>
#include <filesystem>
#include <fstream>
#include <iostream>
#include <map>
#include <memory>
#include <optional>
#include <sstream>
#include <string>

#include <nlohmann/json.hpp>

#include "controller/audit/audit.hpp"
#include "controller/cli/cli_support.hpp"
#include "controller/cli/commands.hpp"
#include "controller/cli/simulated_rack.hpp"
#include "controller/cli/stop_after_interruption.hpp"
#include "controller/evaluation_results.hpp"
#include "controller/method/method_file.hpp"
#include "controller/method/stored_methods.hpp"
#include "controller/method/titer.hpp"
#include "controller/series/series_file.hpp"
#include "controller/series/series_runner.hpp"
#include "controller/series/weighing.hpp"
#include "controller/store/audit_trail.hpp"
#include "controller/store/sqlite_store.hpp"
#include "drivers/connection.hpp"

namespace veq::cli {

namespace {

[[noreturn]] void fail(const std::string& message, int code = 2) {
  throw CLI::Error("Failure", message, code);
}

std::string read_text(const std::string& path, const char* what) {
  std::ifstream in(path, std::ios::binary);
  if (!in)
    fail(std::string("cannot open ") + what + " '" + path + "'");
  std::ostringstream text;
  text << in.rdbuf();
  return text.str();
}

class PrintingSeriesObserver final : public series::SeriesObserver {
 public:
  explicit PrintingSeriesObserver(bool verbose) : verbose_(verbose) {}
  void on_entry(const std::string& kind, const std::string& label) override {
    std::printf("  %-15s %-26s%s", kind.c_str(), label.c_str(), verbose_ ? "\n" : "");
    std::fflush(stdout);
  }
  void on_entry_end(const std::string&, const std::string& status,
                    const std::string& note) override {
    std::printf("%s%s\n", verbose_ ? "  => " : "", status.c_str());
    if (status != "done" && !note.empty())
      std::printf("      %s\n", note.c_str());
  }
  void on_message(const std::string& text) override {
    if (verbose_)
      std::printf("      %s\n", text.c_str());
  }

 private:
  bool verbose_;
};

struct SeriesRunOptions {
  std::string file;
  std::string db = store::default_database_path();
  std::string scenario;
  bool verbose = false;
};

int run_series_file(const SeriesRunOptions& o) {
  const std::string text = read_text(o.file, "series file");
  auto parsed = series::parse_series(text, o.file);
  if (!parsed)
    fail(parsed.error().message);
  auto scenario = simulator::load_scenario(o.scenario);
  if (!scenario)
    fail(scenario.error().message);
  auto store = open_store_or_throw(o.db);
  SimulatedRack rack;
  if (auto built = rack.build(*scenario); !built)
    fail(built.error().message);
  auto stopped = stop_burettes_after_interruption(*rack.instruments, *store);
  if (!stopped)
    fail(stopped.error().message);
  for (const auto& line : *stopped)
    std::printf("%s\n", line.c_str());
  std::fflush(stdout);
  series::SeriesStores stores{*store, *store, *store};
  PrintingSeriesObserver observer(o.verbose);
  std::printf("series '%s' on the simulated bench of '%s', virtual time; data in %s\n",
              parsed->name.c_str(), scenario->name.c_str(), o.db.c_str());
  auto outcome = series::run_series(*parsed, text, *rack.instruments, stores, {}, &observer);
  std::printf("series %lld %s: %s\n", static_cast<long long>(outcome.series_id),
              store::series_status_name(outcome.status), outcome.reason.c_str());
  for (const auto& e : outcome.entries) {
    // Every named result (a method titrating in stages gives one per metal).
    if (e.results.size() > 1) {
      for (const auto& r : e.results)
        if (r.mean)
          std::printf("  %-26s %-9s %12.6g %s %s\n", e.label.c_str(), e.status.c_str(), *r.mean,
                      r.unit.c_str(), r.name.c_str());
    } else if (e.mean) {
      std::printf("  %-26s %-9s %12.6g %s\n", e.label.c_str(), e.status.c_str(), *e.mean,
                  e.unit.c_str());
    }
  }
  return outcome.status == store::SeriesStatus::completed ? 0 : 1;
}

void list_series(const std::string& db) {
  auto store = open_store_or_throw(db);
  auto all = store->list_series();
  if (!all)
    fail(all.error().message);
  std::printf("%6s  %-32s  %-11s  %-24s  %s\n", "series", "name", "status", "started (UTC)",
              "how it ended");
  for (const auto& s : *all)
    std::printf("%6lld  %-32s  %-11s  %-24s  %s\n", static_cast<long long>(s.id), s.name.c_str(),
                store::series_status_name(s.status), s.started_utc.c_str(), s.reason.c_str());
}

void show_series(const std::string& db, std::int64_t id, bool json_out) {
  auto store = open_store_or_throw(db);
  auto s = store->load_series(id);
  if (!s)
    fail(s.error().message);
  auto entries = store->load_entries(id);
  if (!entries)
    fail(entries.error().message);
  nlohmann::json out = {{"series", s->id},
                        {"name", s->name},
                        {"status", store::series_status_name(s->status)},
                        {"reason", s->reason},
                        {"started_utc", s->started_utc},
                        {"finished_utc", s->finished_utc},
                        {"software_version", s->software_version},
                        {"entries", nlohmann::json::array()}};
  // The evaluation a reviewer chose later for a run, if any (audit trail):
  // values that rest on another one are shown as such.
  auto trail = store::AuditTrail::open(db, controller::audit::default_key_path(db).string(), false);
  std::map<std::int64_t, std::optional<store::EvaluationChoice>> choices;
  const auto choice_for = [&](std::int64_t run_id) {
    if (!choices.count(run_id)) {
      std::optional<store::EvaluationChoice> chosen;
      if (trail)
        if (auto c = (*trail)->evaluation_choice(run_id); c && *c)
          chosen = **c;
      choices[run_id] = chosen;
    }
    return choices.at(run_id);
  };
  if (!json_out)
    std::printf("series %lld '%s': %s (%s)\nstarted %s, ended %s, veq %s\n\n",
                static_cast<long long>(s->id), s->name.c_str(),
                store::series_status_name(s->status), s->reason.c_str(), s->started_utc.c_str(),
                s->finished_utc.c_str(), s->software_version.c_str());
  for (const auto& e : *entries) {
    auto determinations = store->load_determinations(e.id);
    auto results = store->load_entry_results(e.id);
    if (!determinations || !results)
      fail("cannot read entry " + std::to_string(e.id));
    nlohmann::json je = {{"entry", e.id},
                         {"kind", e.kind},
                         {"label", e.label},
                         {"method", e.method_name},
                         {"method_version", e.method_version},
                         {"status", e.status},
                         {"note", e.note},
                         {"determinations", nlohmann::json::array()},
                         {"results", nlohmann::json::array()}};
    if (!json_out) {
      std::printf("%-15s %-26s %-9s", e.kind.c_str(), e.label.c_str(), e.status.c_str());
      if (!e.method_name.empty())
        std::printf("  method '%s' version %d", e.method_name.c_str(), e.method_version);
      std::printf("\n");
    }
    for (const auto& d : *determinations) {
      nlohmann::json changed = nlohmann::json::array();
      for (const auto& used : controller::evaluations_used(d.detail_json)) {
        const auto chosen = choice_for(used.run_id);
        if (chosen && chosen->evaluation_id != used.evaluation_id)
          changed.push_back({{"run", used.run_id},
                             {"rests_on_evaluation", used.evaluation_id},
                             {"evaluation_in_use", chosen->evaluation_id},
                             {"chosen_by", chosen->user},
                             {"chosen_utc", chosen->chosen_utc},
                             {"reason", chosen->reason}});
      }
      je["determinations"].push_back(
          {{"replicate", d.replicate},
           {"position", d.position},
           {"run", d.run_id},
           {"second_run", d.second_run_id},
           {"value", d.value},
           {"unit", d.unit},
           {"counted", d.counted},
           {"flags", d.flags},
           {"evaluation_changed", changed},
           {"detail", nlohmann::json::parse(d.detail_json, nullptr, false)}});
      if (!json_out) {
        std::printf("    position %3d", d.position);
        if (d.run_id)
          std::printf("  run %lld", static_cast<long long>(d.run_id));
        if (d.second_run_id)
          std::printf("+%lld", static_cast<long long>(d.second_run_id));
        if (d.unit.empty())
          std::printf("  %s", d.flags.c_str());
        else
          std::printf("  %12.6g %s%s%s", d.value, d.unit.c_str(), d.flags.empty() ? "" : "  ",
                      d.flags.c_str());
        std::printf("\n");
        for (const auto& c : changed)
          std::printf(
              "      run %lld now uses evaluation %lld (chosen by %s at %s: %s); this "
              "value rests on evaluation %lld and is not recomputed\n",
              static_cast<long long>(c["run"].get<std::int64_t>()),
              static_cast<long long>(c["evaluation_in_use"].get<std::int64_t>()),
              c["chosen_by"].get<std::string>().c_str(), c["chosen_utc"].get<std::string>().c_str(),
              c["reason"].get<std::string>().c_str(),
              static_cast<long long>(c["rests_on_evaluation"].get<std::int64_t>()));
      }
    }
    for (const auto& r : *results) {
      je["results"].push_back({{"name", r.name},
                               {"value", r.value},
                               {"unit", r.unit},
                               {"count", r.count},
                               {"sd", r.sd},
                               {"rsd_percent", r.rsd_percent},
                               {"flags", r.flags},
                               {"detail", nlohmann::json::parse(r.detail_json, nullptr, false)}});
      if (!json_out) {
        std::printf("    %s: %.6g %s (n = %d, SD %.3g, RSD %.3f %%)", r.name.c_str(), r.value,
                    r.unit.c_str(), r.count, r.sd, r.rsd_percent);
        const auto detail = nlohmann::json::parse(r.detail_json, nullptr, false);
        if (detail.is_object() && detail.contains("uncertainty"))
          std::printf(", expanded uncertainty %.3g %s (k = 2)",
                      detail["uncertainty"]["expanded"].get<double>(), r.unit.c_str());
        std::printf("\n");
        if (!r.flags.empty())
          std::printf("    flagged: %s\n", r.flags.c_str());
      }
    }
    if (!json_out && e.status != "done" && !e.note.empty())
      std::printf("    note: %s\n", e.note.c_str());
    out["entries"].push_back(je);
  }
  if (json_out)
    std::cout << out.dump(2) << "\n";
}

}  // namespace

void add_series_commands(CLI::App& app) {
  CLI::App* group = app.add_subcommand(
      "series", "Series of samples, blanks, titers, calibrations and checks run unattended");
  group->require_subcommand(1);

  auto run = std::make_shared<SeriesRunOptions>();
  CLI::App* r = group->add_subcommand(
      "run",
      "Run a series file (docs/series.md) on the simulated bench of a scenario with a rack\n"
      "(docs/scenarios.md), in virtual time, storing everything in the database. The methods\n"
      "and titrants it names must be stored first (veq method import, veq titrant add).");
  r->add_option("file", run->file, "series file")->required();
  r->add_option("--db", run->db, "SQLite file")->capture_default_str();
  r->add_option("--scenario", run->scenario, "simulator scenario with a rack (JSON)")->required();
  r->add_flag("--verbose", run->verbose, "print what every step and run does");
  r->callback([run] {
    if (const int code = run_series_file(*run); code != 0)
      throw CLI::RuntimeError(code);
  });

  auto check_file = std::make_shared<std::string>();
  CLI::App* c = group->add_subcommand(
      "check", "Read a series file and report its first error (line and field), or its entries");
  c->add_option("file", *check_file, "series file")->required();
  c->callback([check_file] {
    auto s = series::read_series_file(*check_file);
    if (!s)
      fail(s.error().message);
    std::printf("%s: series '%s', %zu entries\n", check_file->c_str(), s->name.c_str(),
                s->entries.size());
    for (const auto& e : s->entries)
      std::printf("  %-15s %-26s %zu positions\n", series::entry_kind_name(e.kind), e.id.c_str(),
                  e.positions.size());
  });

  struct WeighOptions {
    std::string file;
    std::string balance;
    std::string out;
  };
  auto weigh = std::make_shared<WeighOptions>();
  CLI::App* w = group->add_subcommand(
      "weigh",
      "Weigh the portions a series file marks 'masses = balance' on a connected balance: for\n"
      "each, put the empty vessel on the pan and press Enter (veq tares), add the portion and\n"
      "press Enter (veq reads the settled net mass). The series is written with the masses.");
  w->add_option("file", weigh->file, "series file")->required();
  w->add_option("--balance", weigh->balance,
                "balance connection: serial:/dev/ttyUSB0?baud=9600 or tcp:host:port")
      ->required();
  w->add_option("--out", weigh->out, "series file to write (default: the same file)");
  w->callback([weigh] {
    auto s = series::read_series_file(weigh->file);
    if (!s)
      fail(s.error().message);
    auto line = drivers::open_transport(weigh->balance);
    if (!line)
      fail(line.error().message);
    drivers::SteadyClock clock;
    drivers::DeviceLink link(**line, clock, "balance");
    drivers::BalanceClient balance(link);
    if (auto info = balance.identify(); !info)
      fail("the balance does not answer: " + info.error().message);
    auto outcome = series::weigh_portions(*s, balance, clock, [](const std::string& instruction) {
      std::printf("%s Press Enter when done.\n", instruction.c_str());
      std::fflush(stdout);
      std::string ignored;
      std::getline(std::cin, ignored);
    });
    for (const auto& note : outcome.notes)
      std::printf("  %s\n", note.c_str());
    const std::string out = weigh->out.empty() ? weigh->file : weigh->out;
    std::ofstream file(out, std::ios::binary);
    file << series::write_series(*s);
    if (!file)
      fail("cannot write '" + out + "'");
    std::printf("%d portions weighed, %d without a mass; series written to %s\n", outcome.weighed,
                outcome.failed, out.c_str());
  });

  auto db = std::make_shared<std::string>(store::default_database_path());
  CLI::App* l = group->add_subcommand("list", "List the stored series");
  l->add_option("--db", *db, "SQLite file")->capture_default_str();
  l->callback([db] { list_series(*db); });

  auto show_db = std::make_shared<std::string>(store::default_database_path());
  auto show_id = std::make_shared<std::int64_t>(0);
  auto show_json = std::make_shared<bool>(false);
  CLI::App* s = group->add_subcommand(
      "show", "One series: its entries, determinations (with their runs) and results");
  s->add_option("--db", *show_db, "SQLite file")->capture_default_str();
  s->add_option("--series", *show_id, "series number (veq series list)")->required();
  s->add_flag("--json", *show_json, "print JSON instead of a table");
  s->callback([show_db, show_id, show_json] { show_series(*show_db, *show_id, *show_json); });
}

void add_method_commands(CLI::App& app) {
  CLI::App* group = app.add_subcommand(
      "method", "Methods as versioned text files (docs/methods.md) in the store");
  group->require_subcommand(1);

  struct Options {
    std::string db = store::default_database_path();
    std::string file;
    std::string name;
    int version = 0;
    std::string out;
    std::string user;
    std::string key;
    std::string reason;
  };
  auto o = std::make_shared<Options>();

  CLI::App* imp = group->add_subcommand(
      "import",
      "Store a method file as the next version of its method (an unchanged file adds nothing).\n"
      "Once a store has users, only an administrator may change methods: give --user, and\n"
      "the password on standard input; the change is recorded in the audit trail.");
  imp->add_option("file", o->file, "method file")->required();
  imp->add_option("--db", o->db, "SQLite file")->capture_default_str();
  imp->add_option("--user", o->user, "the administrator changing the method");
  imp->add_option("--key", o->key,
                  "audit key file (default: <db>.audit-key beside the store, or $VEQ_AUDIT_KEY)");
  imp->add_option("--reason", o->reason, "why the method changes (recorded)");
  imp->callback([o] {
    auto m = method::read_method_file(o->file);
    if (!m)
      fail(m.error().message);
    // The audit key is made with a store's first user: without it the store
    // has no users yet (a laboratory setting up), and methods are stored
    // unsigned; with it, the permission is checked.
    const std::string key =
        o->key.empty() ? controller::audit::default_key_path(o->db).string() : o->key;
    std::unique_ptr<store::AuditTrail> trail;
    if (std::filesystem::exists(key)) {
      if (o->user.empty())
        fail("this store has users: give --user (an administrator) to change a method");
      auto t = store::AuditTrail::open(o->db, key, false);
      if (!t)
        fail(t.error().message);
      trail = std::move(t).value();
      auto role = trail->authenticate(o->user, read_password("password of " + o->user));
      if (!role)
        fail(role.error().message);
      if (!controller::audit::allowed(*role, controller::audit::Permission::change_methods))
        fail(o->user + " is a " + controller::audit::role_name(*role) +
             ": only an administrator may change methods");
    }
    auto store = open_store_or_throw(o->db);
    auto before = store->list_method_versions(m->name);
    const int previous = before && !before->empty() ? before->back().version : 0;
    auto saved = method::save_method(*store, *m);
    if (!saved)
      fail(saved.error().message);
    if (saved->version == previous) {
      std::printf("method '%s' unchanged: still version %d\n", saved->name.c_str(), saved->version);
      return;
    }
    if (trail) {
      auto recorded = trail->append(o->user, "change method", "method '" + saved->name + "'",
                                    previous > 0 ? "version " + std::to_string(previous) : "none",
                                    "version " + std::to_string(saved->version), o->reason);
      if (!recorded)
        fail("method stored as version " + std::to_string(saved->version) +
             " but not recorded in the audit trail: " + recorded.error().message);
    }
    std::printf("method '%s' stored as version %d%s\n", saved->name.c_str(), saved->version,
                trail ? " (recorded in the audit trail)" : " (no users in this store)");
  });

  CLI::App* exp = group->add_subcommand("export", "Write a stored method version as a text file");
  exp->add_option("--db", o->db, "SQLite file")->capture_default_str();
  exp->add_option("--name", o->name, "method name")->required();
  exp->add_option("--version", o->version, "version (default: the latest)");
  exp->add_option("--out", o->out, "file to write (default: print)");
  exp->callback([o] {
    auto store = open_store_or_throw(o->db);
    auto m = method::load_method(*store, o->name, o->version);
    if (!m)
      fail(m.error().message);
    const std::string text = method::write_method(*m);
    if (o->out.empty()) {
      std::cout << text;
      return;
    }
    std::ofstream out(o->out, std::ios::binary);
    out << text;
    if (!out)
      fail("cannot write '" + o->out + "'");
  });

  CLI::App* list = group->add_subcommand("list", "Stored methods and their versions");
  list->add_option("--db", o->db, "SQLite file")->capture_default_str();
  list->callback([o] {
    auto store = open_store_or_throw(o->db);
    auto names = store->list_method_names();
    if (!names)
      fail(names.error().message);
    for (const auto& n : *names) {
      auto versions = store->list_method_versions(n);
      if (!versions)
        fail(versions.error().message);
      for (const auto& v : *versions)
        std::printf("%-44s version %3d  %s  %s\n", n.c_str(), v.version, v.created_utc.c_str(),
                    v.used ? "used (frozen)" : "not used yet");
    }
  });

  CLI::App* check = group->add_subcommand(
      "check", "Read a method file and report its first error (line and field)");
  check->add_option("file", o->file, "method file")->required();
  check->callback([o] {
    auto m = method::read_method_file(o->file);
    if (!m)
      fail(m.error().message);
    std::printf("%s: method '%s', %zu steps, valid\n", o->file.c_str(), m->name.c_str(),
                m->steps.size());
  });
}

void add_titrant_commands(CLI::App& app) {
  CLI::App* group = app.add_subcommand("titrant", "Titrant solutions and their titers");
  group->require_subcommand(1);
  struct Options {
    std::string db = store::default_database_path();
    store::TitrantRecord titrant;
  };
  auto o = std::make_shared<Options>();
  CLI::App* add = group->add_subcommand(
      "add", "Add a titrant as made up (or change its concentration, lot and date)");
  add->add_option("--db", o->db, "SQLite file")->capture_default_str();
  add->add_option("--name", o->titrant.name, "name methods use (\"EDTA 0.01 mol/L\")")->required();
  add->add_option("--conc", o->titrant.nominal_conc_mol_per_l, "nominal concentration, mol/L")
      ->required()
      ->check(CLI::PositiveNumber);
  add->add_option("--lot", o->titrant.lot, "lot or batch");
  add->add_option("--prepared", o->titrant.prepared_utc,
                  "preparation time, ISO 8601 UTC (default: now)");
  add->callback([o] {
    if (o->titrant.prepared_utc.empty())
      o->titrant.prepared_utc = store::utc_now_iso8601();
    else if (auto t = method::parse_utc(o->titrant.prepared_utc); !t)
      fail(t.error().message);
    auto store = open_store_or_throw(o->db);
    if (auto r = store->save_titrant(o->titrant); !r)
      fail(r.error().message);
    std::printf("titrant '%s' stored\n", o->titrant.name.c_str());
  });
  CLI::App* list = group->add_subcommand("list", "Titrants with their latest titer");
  list->add_option("--db", o->db, "SQLite file")->capture_default_str();
  list->callback([o] {
    auto store = open_store_or_throw(o->db);
    auto titrants = store->list_titrants();
    if (!titrants)
      fail(titrants.error().message);
    for (const auto& t : *titrants) {
      std::printf("%-32s %.6g mol/L  lot %-12s prepared %s\n", t.name.c_str(),
                  t.nominal_conc_mol_per_l, t.lot.c_str(), t.prepared_utc.c_str());
      auto history = store->titer_history(t.name);
      if (!history)
        continue;
      for (const auto& h : *history)
        std::printf("    titer %.6g mol/L (RSD %.3f %%, n = %zu) %s, determined %s, expires %s\n",
                    h.conc_mol_per_l, h.rsd_percent, h.determinations_mol_per_l.size(),
                    h.accepted ? "accepted" : "refused", h.determined_utc.c_str(),
                    h.expires_utc.c_str());
    }
  });
}

}  // namespace veq::cli
