// Methods with their versions, titrants with their titer history, and
// electrode calibrations in the SQLite store (schema 3, see sqlite_store.cpp).
#include <sqlite3.h>

#include <utility>

#include "controller/store/sqlite_statement.hpp"
#include "controller/store/sqlite_store.hpp"

namespace veq::store {

namespace {

using detail::Statement;

constexpr const char* kVersionColumns =
    "m.name, v.version, v.text, v.created_utc, EXISTS (SELECT 1 FROM method_uses u "
    "WHERE u.method_id = v.method_id AND u.version = v.version)";

MethodVersionRecord read_version(const Statement& s) {
  return MethodVersionRecord{s.text(0), static_cast<int>(s.integer(1)), s.text(2), s.text(3),
                             s.integer(4) != 0};
}

constexpr const char* kTiterColumns =
    "t.id, r.name, t.lot, t.conc_mol_per_l, t.rsd_percent, t.accepted, t.determined_utc, "
    "t.expires_utc, t.note";

constexpr const char* kCalibrationColumns =
    "id, electrode, slope_mv_per_decade, e0_mv, temperature_c, accepted, measured_utc, "
    "expires_utc";

}  // namespace

Result<MethodVersionRecord> SqliteStore::save_method_version(const std::string& name,
                                                             const std::string& text) {
  const auto serialized = serialize();
  if (name.empty())
    return make_error(ErrorKind::invalid_input, "a method needs a name to be stored");
  if (auto r = exec("BEGIN IMMEDIATE"); !r)
    return r.error();
  auto fail = [&](const std::string& what) -> Result<MethodVersionRecord> {
    Error error = storage_error(what);
    (void)exec("ROLLBACK");
    return error;
  };
  {
    Statement s(db_, "INSERT OR IGNORE INTO methods (name, created_utc) VALUES (?1, ?2)");
    s.bind(1, name).bind(2, utc_now_iso8601());
    if (s.step() != SQLITE_DONE)
      return fail("cannot store method '" + name + "'");
  }
  std::int64_t method_id = 0;
  int latest = 0;
  std::string latest_text;
  {
    Statement s(db_,
                "SELECT m.id, IFNULL(MAX(v.version), 0), "
                "(SELECT text FROM method_versions WHERE method_id = m.id ORDER BY version DESC "
                "LIMIT 1) FROM methods m LEFT JOIN method_versions v ON v.method_id = m.id "
                "WHERE m.name = ?1 GROUP BY m.id");
    s.bind(1, name);
    if (s.step() != SQLITE_ROW)
      return fail("cannot read method '" + name + "'");
    method_id = s.integer(0);
    latest = static_cast<int>(s.integer(1));
    latest_text = s.text(2);
  }
  if (latest > 0 && latest_text == text) {
    (void)exec("COMMIT");
    return load_method_version(name, latest);
  }
  {
    Statement s(db_,
                "INSERT INTO method_versions (method_id, version, text, created_utc) "
                "VALUES (?1, ?2, ?3, ?4)");
    s.bind(1, method_id).bind(2, latest + 1).bind(3, text).bind(4, utc_now_iso8601());
    if (s.step() != SQLITE_DONE)
      return fail("cannot store version " + std::to_string(latest + 1) + " of method '" + name +
                  "'");
  }
  if (auto r = exec("COMMIT"); !r) {
    (void)exec("ROLLBACK");
    return r.error();
  }
  return load_method_version(name, latest + 1);
}

Result<void> SqliteStore::replace_method_version(const std::string& name, int version,
                                                 const std::string& text) {
  const auto serialized = serialize();
  auto existing = load_method_version(name, version);
  if (!existing)
    return existing.error();
  if (existing->used) {
    return make_error(ErrorKind::invalid_input,
                      "version " + std::to_string(version) + " of method '" + name +
                          "' has been used by a run and cannot change; save the changed method "
                          "as a new version instead");
  }
  Statement s(db_,
              "UPDATE method_versions SET text = ?1 WHERE version = ?2 AND method_id = "
              "(SELECT id FROM methods WHERE name = ?3)");
  s.bind(1, text).bind(2, version).bind(3, name);
  if (s.step() != SQLITE_DONE) {
    return storage_error("cannot change version " + std::to_string(version) + " of method '" +
                         name + "'");
  }
  return {};
}

Result<MethodVersionRecord> SqliteStore::load_method_version(const std::string& name, int version) {
  const auto serialized = serialize();
  const std::string sql =
      std::string("SELECT ") + kVersionColumns +
      " FROM method_versions v JOIN methods m ON m.id = v.method_id WHERE m.name = ?1 AND "
      "(?2 = 0 OR v.version = ?2) ORDER BY v.version DESC LIMIT 1";
  Statement s(db_, sql.c_str());
  s.bind(1, name).bind(2, version);
  const int rc = s.step();
  if (rc == SQLITE_DONE) {
    return make_error(ErrorKind::not_found, version == 0
                                                ? "no method '" + name + "' in " + path_
                                                : "no version " + std::to_string(version) +
                                                      " of method '" + name + "' in " + path_);
  }
  if (rc != SQLITE_ROW)
    return storage_error("cannot read method '" + name + "'");
  return read_version(s);
}

Result<std::vector<MethodVersionRecord>> SqliteStore::list_method_versions(
    const std::string& name) {
  const auto serialized = serialize();
  const std::string sql = std::string("SELECT ") + kVersionColumns +
                          " FROM method_versions v JOIN methods m ON m.id = v.method_id "
                          "WHERE m.name = ?1 ORDER BY v.version";
  Statement s(db_, sql.c_str());
  s.bind(1, name);
  std::vector<MethodVersionRecord> out;
  int rc;
  while ((rc = s.step()) == SQLITE_ROW)
    out.push_back(read_version(s));
  if (rc != SQLITE_DONE)
    return storage_error("cannot list versions of method '" + name + "'");
  return out;
}

Result<std::vector<std::string>> SqliteStore::list_method_names() {
  const auto serialized = serialize();
  Statement s(db_, "SELECT name FROM methods ORDER BY name");
  std::vector<std::string> out;
  int rc;
  while ((rc = s.step()) == SQLITE_ROW)
    out.push_back(s.text(0));
  if (rc != SQLITE_DONE)
    return storage_error("cannot list methods");
  return out;
}

Result<void> SqliteStore::record_method_use(std::int64_t run_id, const std::string& name,
                                            int version) {
  const auto serialized = serialize();
  auto existing = load_method_version(name, version);
  if (!existing)
    return existing.error();
  Statement s(db_,
              "INSERT INTO method_uses (run_id, method_id, version, recorded_utc) "
              "VALUES (?1, (SELECT id FROM methods WHERE name = ?2), ?3, ?4)");
  s.bind(1, run_id).bind(2, name).bind(3, version).bind(4, utc_now_iso8601());
  if (s.step() != SQLITE_DONE) {
    return storage_error("cannot record that run " + std::to_string(run_id) + " used version " +
                         std::to_string(version) + " of method '" + name + "'");
  }
  return {};
}

Result<void> SqliteStore::save_titrant(const TitrantRecord& t) {
  const auto serialized = serialize();
  if (t.name.empty())
    return make_error(ErrorKind::invalid_input, "a titrant needs a name");
  if (!(t.nominal_conc_mol_per_l > 0.0)) {
    return make_error(ErrorKind::invalid_input,
                      "titrant '" + t.name + "': nominal concentration must be above 0 mol/L");
  }
  Statement s(db_,
              "INSERT INTO titrants (name, nominal_conc_mol_per_l, lot, prepared_utc, "
              "updated_utc) VALUES (?1, ?2, ?3, ?4, ?5) ON CONFLICT (name) DO UPDATE SET "
              "nominal_conc_mol_per_l = excluded.nominal_conc_mol_per_l, lot = excluded.lot, "
              "prepared_utc = excluded.prepared_utc, updated_utc = excluded.updated_utc");
  s.bind(1, t.name)
      .bind(2, t.nominal_conc_mol_per_l)
      .bind(3, t.lot)
      .bind(4, t.prepared_utc)
      .bind(5, utc_now_iso8601());
  if (s.step() != SQLITE_DONE)
    return storage_error("cannot store titrant '" + t.name + "'");
  return {};
}

Result<TitrantRecord> SqliteStore::load_titrant(const std::string& name) {
  const auto serialized = serialize();
  Statement s(db_,
              "SELECT name, nominal_conc_mol_per_l, lot, prepared_utc FROM titrants "
              "WHERE name = ?1");
  s.bind(1, name);
  const int rc = s.step();
  if (rc == SQLITE_DONE)
    return make_error(ErrorKind::not_found, "no titrant '" + name + "' in " + path_);
  if (rc != SQLITE_ROW)
    return storage_error("cannot read titrant '" + name + "'");
  return TitrantRecord{s.text(0), s.real(1), s.text(2), s.text(3)};
}

Result<std::vector<TitrantRecord>> SqliteStore::list_titrants() {
  const auto serialized = serialize();
  Statement s(db_,
              "SELECT name, nominal_conc_mol_per_l, lot, prepared_utc FROM titrants ORDER BY "
              "name");
  std::vector<TitrantRecord> out;
  int rc;
  while ((rc = s.step()) == SQLITE_ROW)
    out.push_back(TitrantRecord{s.text(0), s.real(1), s.text(2), s.text(3)});
  if (rc != SQLITE_DONE)
    return storage_error("cannot list titrants");
  return out;
}

Result<std::int64_t> SqliteStore::add_titer(const TiterRecord& t) {
  const auto serialized = serialize();
  if (t.accepted && t.determinations_mol_per_l.size() < 3) {
    return make_error(ErrorKind::invalid_input,
                      "titer of '" + t.titrant +
                          "': an accepted titer needs at least three "
                          "determinations, got " +
                          std::to_string(t.determinations_mol_per_l.size()));
  }
  if (auto r = exec("BEGIN IMMEDIATE"); !r)
    return r.error();
  auto fail = [&](const std::string& what) -> Result<std::int64_t> {
    Error error = storage_error(what);
    (void)exec("ROLLBACK");
    return error;
  };
  Statement s(db_,
              "INSERT INTO titers (titrant_id, lot, conc_mol_per_l, rsd_percent, accepted, "
              "determined_utc, expires_utc, note, recorded_utc) VALUES ((SELECT id FROM "
              "titrants WHERE name = ?1), ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9)");
  s.bind(1, t.titrant)
      .bind(2, t.lot)
      .bind(3, t.conc_mol_per_l)
      .bind(4, t.rsd_percent)
      .bind(5, t.accepted ? 1 : 0)
      .bind(6, t.determined_utc)
      .bind(7, t.expires_utc)
      .bind(8, t.note)
      .bind(9, utc_now_iso8601());
  if (s.step() != SQLITE_DONE)
    return fail("cannot store a titer of '" + t.titrant + "' (is the titrant stored?)");
  const std::int64_t id = sqlite3_last_insert_rowid(db_);
  for (std::size_t i = 0; i < t.determinations_mol_per_l.size(); ++i) {
    Statement d(db_,
                "INSERT INTO titer_determinations (titer_id, idx, conc_mol_per_l) "
                "VALUES (?1, ?2, ?3)");
    d.bind(1, id).bind(2, static_cast<std::int64_t>(i)).bind(3, t.determinations_mol_per_l[i]);
    if (d.step() != SQLITE_DONE)
      return fail("cannot store titer determination " + std::to_string(i));
  }
  if (auto r = exec("COMMIT"); !r) {
    (void)exec("ROLLBACK");
    return r.error();
  }
  return id;
}

Result<std::vector<TiterRecord>> SqliteStore::titer_history(const std::string& titrant) {
  const auto serialized = serialize();
  const std::string sql = std::string("SELECT ") + kTiterColumns +
                          " FROM titers t JOIN titrants r ON r.id = t.titrant_id "
                          "WHERE r.name = ?1 ORDER BY t.id";
  Statement s(db_, sql.c_str());
  s.bind(1, titrant);
  std::vector<TiterRecord> out;
  int rc;
  while ((rc = s.step()) == SQLITE_ROW) {
    TiterRecord t;
    t.id = s.integer(0);
    t.titrant = s.text(1);
    t.lot = s.text(2);
    t.conc_mol_per_l = s.real(3);
    t.rsd_percent = s.real(4);
    t.accepted = s.integer(5) != 0;
    t.determined_utc = s.text(6);
    t.expires_utc = s.text(7);
    t.note = s.text(8);
    out.push_back(std::move(t));
  }
  if (rc != SQLITE_DONE)
    return storage_error("cannot read titers of '" + titrant + "'");
  for (auto& t : out) {
    Statement d(db_,
                "SELECT conc_mol_per_l FROM titer_determinations WHERE titer_id = ?1 "
                "ORDER BY idx");
    d.bind(1, t.id);
    while ((rc = d.step()) == SQLITE_ROW)
      t.determinations_mol_per_l.push_back(d.real(0));
    if (rc != SQLITE_DONE)
      return storage_error("cannot read titer determinations");
  }
  return out;
}

Result<std::int64_t> SqliteStore::add_calibration(const CalibrationRecord& c) {
  const auto serialized = serialize();
  if (c.electrode.empty())
    return make_error(ErrorKind::invalid_input, "a calibration needs an electrode name");
  Statement s(db_,
              "INSERT INTO calibrations (electrode, slope_mv_per_decade, e0_mv, temperature_c, "
              "accepted, measured_utc, expires_utc, recorded_utc) "
              "VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8)");
  s.bind(1, c.electrode)
      .bind(2, c.slope_mv_per_decade)
      .bind(3, c.e0_mv)
      .bind(4, c.temperature_c)
      .bind(5, c.accepted ? 1 : 0)
      .bind(6, c.measured_utc)
      .bind(7, c.expires_utc)
      .bind(8, utc_now_iso8601());
  if (s.step() != SQLITE_DONE)
    return storage_error("cannot store a calibration of '" + c.electrode + "'");
  return static_cast<std::int64_t>(sqlite3_last_insert_rowid(db_));
}

Result<std::vector<CalibrationRecord>> SqliteStore::calibration_history(
    const std::string& electrode) {
  const auto serialized = serialize();
  const std::string sql = std::string("SELECT ") + kCalibrationColumns +
                          " FROM calibrations WHERE electrode = ?1 ORDER BY id";
  Statement s(db_, sql.c_str());
  s.bind(1, electrode);
  std::vector<CalibrationRecord> out;
  int rc;
  while ((rc = s.step()) == SQLITE_ROW) {
    CalibrationRecord c;
    c.id = s.integer(0);
    c.electrode = s.text(1);
    c.slope_mv_per_decade = s.real(2);
    c.e0_mv = s.real(3);
    c.temperature_c = s.real(4);
    c.accepted = s.integer(5) != 0;
    c.measured_utc = s.text(6);
    c.expires_utc = s.text(7);
    out.push_back(std::move(c));
  }
  if (rc != SQLITE_DONE)
    return storage_error("cannot read calibrations of '" + electrode + "'");
  return out;
}

}  // namespace veq::store
