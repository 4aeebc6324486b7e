// The instruments the desktop application works with, opened from one
// connection per role: real devices through connection strings (and device
// profiles), or the simulated rack of `veq demo` in virtual time. Plain C++
// without Qt: the rack worker (rack_worker.hpp) owns one and uses it on its
// own thread only.
#pragma once

#include <array>
#include <memory>
#include <optional>
#include <string>
#include <vector>

#include "common/result.hpp"
#include "controller/series/series_runner.hpp"
#include "controller/store/sqlite_store.hpp"
#include "drivers/burette_client.hpp"
#include "drivers/clock.hpp"
#include "simulator/bench.hpp"

namespace veq::ui {

/// The places on the bench the Instruments view offers, in the order shown.
enum class BenchRole : int {
  burette = 0,         ///< "burette 1": the titrant
  second_burette = 1,  ///< "burette 2": a second titrant (back-titration)
  electrode = 2,       ///< potentiometric sensor (mV, pH)
  reagent_doser = 3,   ///< pumps "doser 1".."doser 6"
  stirrer = 4,
  sample_changer = 5,
  balance = 6,
};
inline constexpr int kBenchRoleCount = 7;
/// "burette 1", "burette 2", "electrode", "reagent doser", "stirrer",
/// "sample changer", "balance": the names methods and messages use.
const char* bench_role_name(BenchRole role);
/// The role's kind of device for device profiles (drivers/roles.hpp).
const char* bench_role_profile_kind(BenchRole role);

/// The word that chooses the simulated instrument instead of a connection
/// string.
inline constexpr const char* kSimulatedConnection = "simulated";

/// How one role is reached. An empty connection: no such device on the bench.
struct RoleConnection {
  /// "simulated", or a connection string (drivers/connection.hpp).
  std::string connection;
  /// A device profile file (drivers/profile.hpp); empty: veq's native protocol.
  std::string profile_path;
};

struct RackSettings {
  std::array<RoleConnection, kBenchRoleCount> roles;
  RoleConnection& operator[](BenchRole r) { return roles[static_cast<int>(r)]; }
  const RoleConnection& operator[](BenchRole r) const { return roles[static_cast<int>(r)]; }
  /// Every role "simulated".
  static RackSettings all_simulated();
};

/// What a role answered when asked who it is.
struct RoleAnswer {
  BenchRole role = BenchRole::burette;
  bool ok = false;
  std::string text;  ///< model and serial number, or the error
};

/// One reading of the electrode.
struct SensorReading {
  double potential_mv = 0.0;
  double temperature_c = 0.0;
  std::optional<double> ph;
  double clock_s = 0.0;  ///< the rack clock when read, s
};

/// The opened instruments. Not thread-safe: one thread uses it at a time
/// (the rack worker's).
class Rack {
 public:
  virtual ~Rack() = default;
  /// The instruments as a series uses them; nullptr when the bench lacks a
  /// burette 1 or an electrode (the error says which).
  virtual series::SeriesInstruments* instruments() = 0;
  virtual drivers::Clock& clock() = 0;
  /// The simulated bench (hidden truths, faults), or nullptr for real devices.
  virtual simulator::SimulatedBench* bench() = 0;
  /// Every burette on the bench (to stop them).
  virtual std::vector<drivers::BuretteClient*> burettes() = 0;
  /// Asks every configured device who it is (clients learn their limits).
  virtual std::vector<RoleAnswer> identify_all() = 0;
  /// One electrode reading; the simulated rack first lets `advance_s` of
  /// virtual time pass so that readings move on like a real meter's.
  virtual Result<SensorReading> read_sensor(double advance_s) = 0;
  /// Why instruments() is nullptr ("no electrode connected"...).
  virtual std::string missing() const = 0;
  bool simulated() { return bench() != nullptr; }
};

/// Opens the rack. Every role is either "simulated" or a connection string;
/// simulated instruments share one virtual bench and clock, so they cannot
/// be mixed with real ones (invalid_input naming the role). Errors name the
/// role and say what is wrong with its connection string or profile.
Result<std::unique_ptr<Rack>> open_rack(const RackSettings& settings);

/// The records the demo rack's series needs in a store before it runs (as
/// `veq demo` makes them): its two methods, the titrants as made up, and the
/// calcium standard's titer. Existing records are kept (a method stores a
/// new version only when its text changed).
Result<void> prepare_demo_records(store::SqliteStore& store);

/// The demo rack's series file (controller/cli/demo_data.hpp).
const char* demo_series_text();

}  // namespace veq::ui
