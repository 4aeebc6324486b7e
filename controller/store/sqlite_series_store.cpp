// Series, their entries, determinations, entry results and burette checks in
// the SQLite store (schema 5, see sqlite_store.cpp).
#include <sqlite3.h>

#include <nlohmann/json.hpp>

#include "common/version.hpp"
#include "controller/store/sqlite_statement.hpp"
#include "controller/store/sqlite_store.hpp"

namespace veq::store {

namespace {

using detail::Statement;

constexpr const char* kSeriesColumns =
    "id, name, text, software_version, started_utc, finished_utc, status, reason";
constexpr const char* kEntryColumns =
    "id, series_id, idx, kind, label, method_name, method_version, status, note, started_utc, "
    "finished_utc";
constexpr const char* kDeterminationColumns =
    "id, entry_id, replicate, position, IFNULL(run_id, 0), IFNULL(second_run_id, 0), value, "
    "unit, counted, flags, detail_json, recorded_utc";
constexpr const char* kEntryResultColumns =
    "id, entry_id, name, value, unit, count, sd, rsd_percent, flags, detail_json";
constexpr const char* kBuretteCheckColumns =
    "id, IFNULL(entry_id, 0), burette, nominal_volume_ml, test_volume_ml, water_masses_json, "
    "water_temperature_c, mean_volume_ml, systematic_error_percent, random_error_percent, passed, "
    "limits_source, checked_utc";

SeriesRecord read_series(const Statement& s) {
  SeriesRecord r;
  r.id = s.integer(0);
  r.name = s.text(1);
  r.text = s.text(2);
  r.software_version = s.text(3);
  r.started_utc = s.text(4);
  r.finished_utc = s.text(5);
  r.status = static_cast<SeriesStatus>(s.integer(6));
  r.reason = s.text(7);
  return r;
}

SeriesEntryRecord read_entry(const Statement& s) {
  SeriesEntryRecord r;
  r.id = s.integer(0);
  r.series_id = s.integer(1);
  r.index = static_cast<int>(s.integer(2));
  r.kind = s.text(3);
  r.label = s.text(4);
  r.method_name = s.text(5);
  r.method_version = static_cast<int>(s.integer(6));
  r.status = s.text(7);
  r.note = s.text(8);
  r.started_utc = s.text(9);
  r.finished_utc = s.text(10);
  return r;
}

DeterminationRecord read_determination(const Statement& s) {
  DeterminationRecord r;
  r.id = s.integer(0);
  r.entry_id = s.integer(1);
  r.replicate = static_cast<int>(s.integer(2));
  r.position = static_cast<int>(s.integer(3));
  r.run_id = s.integer(4);
  r.second_run_id = s.integer(5);
  r.value = s.real(6);
  r.unit = s.text(7);
  r.counted = s.integer(8) != 0;
  r.flags = s.text(9);
  r.detail_json = s.text(10);
  r.recorded_utc = s.text(11);
  return r;
}

EntryResultRecord read_entry_result(const Statement& s) {
  EntryResultRecord r;
  r.id = s.integer(0);
  r.entry_id = s.integer(1);
  r.name = s.text(2);
  r.value = s.real(3);
  r.unit = s.text(4);
  r.count = static_cast<int>(s.integer(5));
  r.sd = s.real(6);
  r.rsd_percent = s.real(7);
  r.flags = s.text(8);
  r.detail_json = s.text(9);
  return r;
}

BuretteCheckRecord read_burette_check(const Statement& s) {
  BuretteCheckRecord r;
  r.id = s.integer(0);
  r.entry_id = s.integer(1);
  r.burette = s.text(2);
  r.nominal_volume_ml = s.real(3);
  r.test_volume_ml = s.real(4);
  const auto masses = nlohmann::json::parse(s.text(5), nullptr, false);
  if (masses.is_array())
    for (const auto& m : masses)
      if (m.is_number())
        r.water_masses_g.push_back(m.get<double>());
  r.water_temperature_c = s.real(6);
  r.mean_volume_ml = s.real(7);
  r.systematic_error_percent = s.real(8);
  r.random_error_percent = s.real(9);
  r.passed = s.integer(10) != 0;
  r.limits_source = s.text(11);
  r.checked_utc = s.text(12);
  return r;
}

/// Binds an id, or NULL for 0 (no run).
void bind_optional_id(Statement& s, int i, std::int64_t id) {
  if (id > 0)
    s.bind(i, id);
}

}  // namespace

const char* series_status_name(SeriesStatus status) {
  switch (status) {
    case SeriesStatus::running:
      return "running";
    case SeriesStatus::completed:
      return "completed";
    case SeriesStatus::stopped:
      return "stopped";
    case SeriesStatus::aborted:
      return "aborted";
    case SeriesStatus::interrupted:
      return "interrupted";
  }
  return "unknown";
}

Result<std::int64_t> SqliteStore::begin_series(const std::string& name, const std::string& text) {
  const auto serialized = serialize();
  Statement s(db_,
              "INSERT INTO series (name, text, software_version, started_utc, status, owner) "
              "VALUES (?1, ?2, ?3, ?4, ?5, ?6)");
  s.bind(1, name)
      .bind(2, text)
      .bind(3, std::string(kVersion))
      .bind(4, utc_now_iso8601())
      .bind(5, static_cast<int>(SeriesStatus::running))
      .bind(6, process_owner_token());
  if (s.step() != SQLITE_DONE)
    return storage_error("cannot store series '" + name + "'");
  return sqlite3_last_insert_rowid(db_);
}

Result<void> SqliteStore::finish_series(std::int64_t series_id, SeriesStatus status,
                                        const std::string& reason) {
  const auto serialized = serialize();
  Statement s(db_, "UPDATE series SET status = ?1, reason = ?2, finished_utc = ?3 WHERE id = ?4");
  s.bind(1, static_cast<int>(status)).bind(2, reason).bind(3, utc_now_iso8601()).bind(4, series_id);
  if (s.step() != SQLITE_DONE)
    return storage_error("cannot end series " + std::to_string(series_id));
  if (sqlite3_changes(db_) != 1)
    return make_error(ErrorKind::not_found,
                      "no series " + std::to_string(series_id) + " in " + path_);
  return {};
}

Result<std::int64_t> SqliteStore::begin_entry(const SeriesEntryRecord& r) {
  const auto serialized = serialize();
  Statement s(
      db_,
      "INSERT INTO series_entries (series_id, idx, kind, label, method_name, "
      "method_version, status, started_utc) VALUES (?1, ?2, ?3, ?4, ?5, ?6, 'running', ?7)");
  s.bind(1, r.series_id)
      .bind(2, r.index)
      .bind(3, r.kind)
      .bind(4, r.label)
      .bind(5, r.method_name)
      .bind(6, r.method_version)
      .bind(7, utc_now_iso8601());
  if (s.step() != SQLITE_DONE)
    return storage_error("cannot store entry '" + r.label + "' of series " +
                         std::to_string(r.series_id));
  return sqlite3_last_insert_rowid(db_);
}

Result<void> SqliteStore::finish_entry(std::int64_t entry_id, const std::string& status,
                                       const std::string& note) {
  const auto serialized = serialize();
  if (status == "running")
    return make_error(ErrorKind::invalid_input, "an entry cannot end as running");
  Statement s(db_,
              "UPDATE series_entries SET status = ?1, note = ?2, finished_utc = ?3 WHERE id = ?4 "
              "AND status = 'running'");
  s.bind(1, status).bind(2, note).bind(3, utc_now_iso8601()).bind(4, entry_id);
  if (s.step() != SQLITE_DONE)
    return storage_error("cannot end series entry " + std::to_string(entry_id));
  if (sqlite3_changes(db_) != 1)
    return make_error(ErrorKind::invalid_input,
                      "series entry " + std::to_string(entry_id) + " is not running in " + path_);
  return {};
}

Result<std::int64_t> SqliteStore::add_determination(const DeterminationRecord& r) {
  const auto serialized = serialize();
  Statement s(db_,
              "INSERT INTO determinations (entry_id, replicate, position, run_id, second_run_id, "
              "value, unit, counted, flags, detail_json, recorded_utc) VALUES (?1, ?2, ?3, ?4, ?5, "
              "?6, ?7, ?8, ?9, ?10, ?11)");
  s.bind(1, r.entry_id).bind(2, r.replicate).bind(3, r.position);
  bind_optional_id(s, 4, r.run_id);
  bind_optional_id(s, 5, r.second_run_id);
  s.bind(6, r.value)
      .bind(7, r.unit)
      .bind(8, r.counted ? 1 : 0)
      .bind(9, r.flags)
      .bind(10, r.detail_json.empty() ? std::string("{}") : r.detail_json)
      .bind(11, utc_now_iso8601());
  if (s.step() != SQLITE_DONE)
    return storage_error("cannot store determination " + std::to_string(r.replicate) +
                         " of series entry " + std::to_string(r.entry_id));
  return sqlite3_last_insert_rowid(db_);
}

Result<std::int64_t> SqliteStore::add_entry_result(const EntryResultRecord& r) {
  const auto serialized = serialize();
  Statement s(db_,
              "INSERT INTO entry_results (entry_id, name, value, unit, count, sd, rsd_percent, "
              "flags, detail_json, recorded_utc) VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9, ?10)");
  s.bind(1, r.entry_id)
      .bind(2, r.name)
      .bind(3, r.value)
      .bind(4, r.unit)
      .bind(5, r.count)
      .bind(6, r.sd)
      .bind(7, r.rsd_percent)
      .bind(8, r.flags)
      .bind(9, r.detail_json.empty() ? std::string("{}") : r.detail_json)
      .bind(10, utc_now_iso8601());
  if (s.step() != SQLITE_DONE)
    return storage_error("cannot store result '" + r.name + "' of series entry " +
                         std::to_string(r.entry_id));
  return sqlite3_last_insert_rowid(db_);
}

Result<std::int64_t> SqliteStore::add_burette_check(const BuretteCheckRecord& r) {
  const auto serialized = serialize();
  Statement s(db_,
              "INSERT INTO burette_checks (entry_id, burette, nominal_volume_ml, test_volume_ml, "
              "water_masses_json, water_temperature_c, mean_volume_ml, systematic_error_percent, "
              "random_error_percent, passed, limits_source, checked_utc) VALUES (?1, ?2, ?3, ?4, "
              "?5, ?6, ?7, ?8, ?9, ?10, ?11, ?12)");
  bind_optional_id(s, 1, r.entry_id);
  s.bind(2, r.burette)
      .bind(3, r.nominal_volume_ml)
      .bind(4, r.test_volume_ml)
      .bind(5, nlohmann::json(r.water_masses_g).dump())
      .bind(6, r.water_temperature_c)
      .bind(7, r.mean_volume_ml)
      .bind(8, r.systematic_error_percent)
      .bind(9, r.random_error_percent)
      .bind(10, r.passed ? 1 : 0)
      .bind(11, r.limits_source)
      .bind(12, r.checked_utc.empty() ? utc_now_iso8601() : r.checked_utc);
  if (s.step() != SQLITE_DONE)
    return storage_error("cannot store the check of burette '" + r.burette + "'");
  return sqlite3_last_insert_rowid(db_);
}

Result<SeriesRecord> SqliteStore::load_series(std::int64_t series_id) {
  const auto serialized = serialize();
  Statement s(db_,
              (std::string("SELECT ") + kSeriesColumns + " FROM series WHERE id = ?1").c_str());
  s.bind(1, series_id);
  const int rc = s.step();
  if (rc == SQLITE_ROW)
    return read_series(s);
  if (rc == SQLITE_DONE)
    return make_error(ErrorKind::not_found,
                      "no series " + std::to_string(series_id) + " in " + path_);
  return storage_error("cannot read series " + std::to_string(series_id));
}

Result<std::vector<SeriesRecord>> SqliteStore::list_series() {
  const auto serialized = serialize();
  Statement s(db_, (std::string("SELECT ") + kSeriesColumns + " FROM series ORDER BY id").c_str());
  std::vector<SeriesRecord> out;
  int rc = 0;
  while ((rc = s.step()) == SQLITE_ROW)
    out.push_back(read_series(s));
  if (rc != SQLITE_DONE)
    return storage_error("cannot list series");
  return out;
}

Result<std::vector<SeriesEntryRecord>> SqliteStore::load_entries(std::int64_t series_id) {
  const auto serialized = serialize();
  Statement s(db_, (std::string("SELECT ") + kEntryColumns +
                    " FROM series_entries WHERE series_id = ?1 ORDER BY idx, id")
                       .c_str());
  s.bind(1, series_id);
  std::vector<SeriesEntryRecord> out;
  int rc = 0;
  while ((rc = s.step()) == SQLITE_ROW)
    out.push_back(read_entry(s));
  if (rc != SQLITE_DONE)
    return storage_error("cannot read the entries of series " + std::to_string(series_id));
  return out;
}

Result<std::vector<DeterminationRecord>> SqliteStore::load_determinations(std::int64_t entry_id) {
  const auto serialized = serialize();
  Statement s(db_, (std::string("SELECT ") + kDeterminationColumns +
                    " FROM determinations WHERE entry_id = ?1 ORDER BY id")
                       .c_str());
  s.bind(1, entry_id);
  std::vector<DeterminationRecord> out;
  int rc = 0;
  while ((rc = s.step()) == SQLITE_ROW)
    out.push_back(read_determination(s));
  if (rc != SQLITE_DONE)
    return storage_error("cannot read the determinations of series entry " +
                         std::to_string(entry_id));
  return out;
}

Result<std::vector<EntryResultRecord>> SqliteStore::load_entry_results(std::int64_t entry_id) {
  const auto serialized = serialize();
  Statement s(db_, (std::string("SELECT ") + kEntryResultColumns +
                    " FROM entry_results WHERE entry_id = ?1 ORDER BY id")
                       .c_str());
  s.bind(1, entry_id);
  std::vector<EntryResultRecord> out;
  int rc = 0;
  while ((rc = s.step()) == SQLITE_ROW)
    out.push_back(read_entry_result(s));
  if (rc != SQLITE_DONE)
    return storage_error("cannot read the results of series entry " + std::to_string(entry_id));
  return out;
}

Result<std::vector<BuretteCheckRecord>> SqliteStore::burette_check_history(
    const std::string& burette) {
  const auto serialized = serialize();
  Statement s(db_, (std::string("SELECT ") + kBuretteCheckColumns +
                    " FROM burette_checks WHERE burette = ?1 ORDER BY id")
                       .c_str());
  s.bind(1, burette);
  std::vector<BuretteCheckRecord> out;
  int rc = 0;
  while ((rc = s.step()) == SQLITE_ROW)
    out.push_back(read_burette_check(s));
  if (rc != SQLITE_DONE)
    return storage_error("cannot read the checks of burette '" + burette + "'");
  return out;
}

}  // namespace veq::store
