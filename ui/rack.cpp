#include "ui/rack.hpp"

#include <chrono>
#include <map>
#include <utility>

#include "controller/cli/demo_data.hpp"
#include "controller/cli/simulated_rack.hpp"
#include "controller/method/method_file.hpp"
#include "controller/method/stored_methods.hpp"
#include "controller/method/titer.hpp"
#include "controller/method/utc_time.hpp"
#include "drivers/connection.hpp"
#include "drivers/device_link.hpp"
#include "drivers/profile.hpp"
#include "drivers/profile_link.hpp"

namespace veq::ui {

const char* bench_role_name(BenchRole role) {
  switch (role) {
    case BenchRole::burette:
      return "burette 1";
    case BenchRole::second_burette:
      return "burette 2";
    case BenchRole::electrode:
      return "electrode";
    case BenchRole::reagent_doser:
      return "reagent doser";
    case BenchRole::stirrer:
      return "stirrer";
    case BenchRole::sample_changer:
      return "sample changer";
    case BenchRole::balance:
      return "balance";
  }
  return "device";
}

const char* bench_role_profile_kind(BenchRole role) {
  switch (role) {
    case BenchRole::burette:
    case BenchRole::second_burette:
      return "burette";
    case BenchRole::electrode:
      return "potential_sensor";
    case BenchRole::reagent_doser:
      return "auxiliary_doser";
    case BenchRole::stirrer:
      return "stirrer";
    case BenchRole::sample_changer:
      return "sample_changer";
    case BenchRole::balance:
      return "balance";
  }
  return "";
}

RackSettings RackSettings::all_simulated() {
  RackSettings s;
  for (auto& r : s.roles)
    r.connection = kSimulatedConnection;
  return s;
}

namespace {

// The doser's pumps by the names methods use, as the demo rack has them.
const std::pair<const char*, drivers::Reagent> kPumps[] = {
    {"doser 1", drivers::Reagent::buffer},    {"doser 2", drivers::Reagent::acid},
    {"doser 3", drivers::Reagent::base},      {"doser 4", drivers::Reagent::masking_agent},
    {"doser 5", drivers::Reagent::indicator}, {"doser 6", drivers::Reagent::water}};

template <typename Info>
std::string describe_identity(const Result<Info>& info) {
  if (!info)
    return info.error().describe();
  std::string text = info->model.empty() ? "answers" : info->model;
  if (!info->serial_number.empty())
    text += ", serial number " + info->serial_number;
  return text;
}

/// The pieces both racks share: clients by role, and the identify calls.
struct Clients {
  std::unique_ptr<drivers::BuretteClient> burette, second_burette;
  std::unique_ptr<drivers::PotentialSensorClient> sensor;
  std::unique_ptr<drivers::AuxiliaryDoserClient> doser;
  std::unique_ptr<drivers::StirrerClient> stirrer;
  std::unique_ptr<drivers::SampleChangerClient> changer;
  std::unique_ptr<drivers::BalanceClient> balance;

  std::vector<RoleAnswer> identify_all() {
    std::vector<RoleAnswer> answers;
    auto add = [&answers](BenchRole role, const auto& info) {
      answers.push_back(RoleAnswer{role, info.has_value(), describe_identity(info)});
    };
    if (burette)
      add(BenchRole::burette, burette->identify());
    if (second_burette)
      add(BenchRole::second_burette, second_burette->identify());
    if (sensor)
      add(BenchRole::electrode, sensor->identify());
    if (doser)
      add(BenchRole::reagent_doser, doser->identify());
    if (stirrer)
      add(BenchRole::stirrer, stirrer->identify());
    if (changer)
      add(BenchRole::sample_changer, changer->identify());
    if (balance)
      add(BenchRole::balance, balance->identify());
    return answers;
  }

  std::vector<drivers::BuretteClient*> burettes() {
    std::vector<drivers::BuretteClient*> all;
    if (burette)
      all.push_back(burette.get());
    if (second_burette)
      all.push_back(second_burette.get());
    return all;
  }

  Result<SensorReading> read(drivers::Clock& clock) {
    if (!sensor)
      return make_error(ErrorKind::invalid_input,
                        "no electrode connected; give the electrode a connection on the "
                        "Instruments view");
    auto r = sensor->read();
    if (!r)
      return r.error();
    return SensorReading{r->potential_mv, r->temperature_c, r->ph, clock.now_s()};
  }
};

/// The demo bench of `veq demo`, in memory and in virtual time.
class SimulatedRackAdapter final : public Rack {
 public:
  cli::SimulatedRack rack;

  series::SeriesInstruments* instruments() override { return rack.instruments.get(); }
  drivers::Clock& clock() override { return rack.clock; }
  simulator::SimulatedBench* bench() override { return rack.bench.get(); }
  std::vector<drivers::BuretteClient*> burettes() override {
    return {rack.burette.get(), rack.second_burette.get()};
  }
  std::vector<RoleAnswer> identify_all() override {
    std::vector<RoleAnswer> answers;
    auto add = [&answers](BenchRole role, const auto& info) {
      answers.push_back(RoleAnswer{role, info.has_value(), describe_identity(info)});
    };
    add(BenchRole::burette, rack.burette->identify());
    add(BenchRole::second_burette, rack.second_burette->identify());
    add(BenchRole::electrode, rack.sensor->identify());
    add(BenchRole::reagent_doser, rack.doser->identify());
    add(BenchRole::stirrer, rack.stirrer->identify());
    add(BenchRole::sample_changer, rack.changer->identify());
    add(BenchRole::balance, rack.balance->identify());
    return answers;
  }
  Result<SensorReading> read_sensor(double advance_s) override {
    if (advance_s > 0.0)
      rack.clock.sleep_for(drivers::from_seconds(advance_s));
    auto r = rack.sensor->read();
    if (!r)
      return r.error();
    return SensorReading{r->potential_mv, r->temperature_c, r->ph, rack.clock.now_s()};
  }
  std::string missing() const override { return {}; }
};

/// Real devices on the steady clock, one transport and link per role.
class ConnectedRack final : public Rack {
 public:
  drivers::SteadyClock steady;
  std::vector<std::unique_ptr<drivers::Transport>> transports;
  std::vector<std::unique_ptr<drivers::DeviceChannel>> channels;
  Clients clients;
  std::unique_ptr<series::SeriesInstruments> series_instruments;
  std::string why_not;

  series::SeriesInstruments* instruments() override { return series_instruments.get(); }
  drivers::Clock& clock() override { return steady; }
  simulator::SimulatedBench* bench() override { return nullptr; }
  std::vector<drivers::BuretteClient*> burettes() override { return clients.burettes(); }
  std::vector<RoleAnswer> identify_all() override { return clients.identify_all(); }
  Result<SensorReading> read_sensor(double /*advance_s*/) override { return clients.read(steady); }
  std::string missing() const override { return why_not; }

  Result<drivers::DeviceChannel*> open_channel(BenchRole role, const RoleConnection& c) {
    const std::string name = bench_role_name(role);
    auto transport = drivers::open_transport(c.connection);
    if (!transport)
      return make_error(transport.error().kind,
                        name + ": " + transport.error().message +
                            "; check the connection string on the Instruments view");
    drivers::Transport& line = **transport;
    transports.push_back(std::move(transport).value());
    if (c.profile_path.empty()) {
      channels.push_back(std::make_unique<drivers::DeviceLink>(line, steady, name));
      return channels.back().get();
    }
    auto profile = drivers::profile::load_profile(c.profile_path);
    if (!profile)
      return make_error(profile.error().kind, name + ": " + profile.error().message);
    if (drivers::role_name(profile->role) != bench_role_profile_kind(role)) {
      return make_error(ErrorKind::invalid_input,
                        name + ": the device profile " + c.profile_path + " describes a " +
                            std::string(drivers::role_name(profile->role)) + ", not a " +
                            bench_role_profile_kind(role) +
                            "; choose a profile for this kind of device");
    }
    auto link = drivers::ProfileLink::open(line, steady, name, std::move(profile).value());
    if (!link)
      return make_error(link.error().kind, name + ": " + link.error().message);
    channels.push_back(std::move(link).value());
    return channels.back().get();
  }
};

}  // namespace

Result<std::unique_ptr<Rack>> open_rack(const RackSettings& settings) {
  int simulated = 0;
  int connected = 0;
  for (const auto& r : settings.roles) {
    if (r.connection == kSimulatedConnection)
      ++simulated;
    else if (!r.connection.empty())
      ++connected;
  }
  if (simulated > 0 && connected > 0) {
    for (int i = 0; i < kBenchRoleCount; ++i) {
      const auto& c = settings.roles[static_cast<std::size_t>(i)];
      if (!c.connection.empty() && c.connection != kSimulatedConnection) {
        return make_error(ErrorKind::invalid_input,
                          std::string(bench_role_name(static_cast<BenchRole>(i))) +
                              ": simulated instruments share one virtual bench and clock and "
                              "cannot work beside a real device; make every role simulated or "
                              "give every role a connection string");
      }
    }
  }
  if (simulated == 0 && connected == 0) {
    return make_error(ErrorKind::invalid_input,
                      "no instrument has a connection; give each device a connection string "
                      "(serial:/dev/ttyUSB0?baud=9600, tcp:host:port) or choose simulated "
                      "instruments");
  }

  if (simulated > 0) {
    auto scenario = simulator::parse_scenario(cli::demo::kScenario, "demo rack scenario");
    if (!scenario)
      return scenario.error();
    auto rack = std::make_unique<SimulatedRackAdapter>();
    if (auto built = rack->rack.build(*scenario); !built)
      return built.error();
    return std::unique_ptr<Rack>(std::move(rack));
  }

  auto rack = std::make_unique<ConnectedRack>();
  auto& c = rack->clients;
  auto open = [&](BenchRole role) -> Result<drivers::DeviceChannel*> {
    const RoleConnection& conn = settings[role];
    if (conn.connection.empty())
      return static_cast<drivers::DeviceChannel*>(nullptr);
    return rack->open_channel(role, conn);
  };
  for (int i = 0; i < kBenchRoleCount; ++i) {
    const auto role = static_cast<BenchRole>(i);
    auto channel = open(role);
    if (!channel)
      return channel.error();
    if (*channel == nullptr)
      continue;
    drivers::DeviceChannel& link = **channel;
    switch (role) {
      case BenchRole::burette:
        c.burette = std::make_unique<drivers::BuretteClient>(link);
        break;
      case BenchRole::second_burette:
        c.second_burette = std::make_unique<drivers::BuretteClient>(link);
        break;
      case BenchRole::electrode:
        c.sensor = std::make_unique<drivers::PotentialSensorClient>(link);
        break;
      case BenchRole::reagent_doser:
        c.doser = std::make_unique<drivers::AuxiliaryDoserClient>(link);
        break;
      case BenchRole::stirrer:
        c.stirrer = std::make_unique<drivers::StirrerClient>(link);
        break;
      case BenchRole::sample_changer:
        c.changer = std::make_unique<drivers::SampleChangerClient>(link);
        break;
      case BenchRole::balance:
        c.balance = std::make_unique<drivers::BalanceClient>(link);
        break;
    }
  }
  if (!c.burette) {
    rack->why_not = "no burette 1 connected: a series needs the titrant's burette";
  } else if (!c.sensor) {
    rack->why_not = "no electrode connected: a series needs a sensor to read";
  } else {
    rack->series_instruments = std::make_unique<series::SeriesInstruments>(
        series::SeriesInstruments{rack->steady, *c.sensor, {}, {}});
    auto& in = *rack->series_instruments;
    in.burettes["burette 1"] = c.burette.get();
    if (c.second_burette)
      in.burettes["burette 2"] = c.second_burette.get();
    if (c.doser) {
      for (const auto& [name, reagent] : kPumps)
        in.pumps[name] = series::Pump{c.doser.get(), reagent};
    }
    in.changer = c.changer.get();
    in.balance = c.balance.get();
    in.stirrer = c.stirrer.get();
  }
  return std::unique_ptr<Rack>(std::move(rack));
}

Result<void> prepare_demo_records(store::SqliteStore& store) {
  for (const char* text : {cli::demo::kCalciumMethod, cli::demo::kNickelMethod}) {
    auto m = method::parse_method(text, "demo method");
    if (!m)
      return m.error();
    if (auto saved = method::save_method(store, *m); !saved)
      return saved.error();
  }
  const auto now =
      std::chrono::time_point_cast<std::chrono::milliseconds>(std::chrono::system_clock::now());
  for (const auto& [name, lot] :
       {std::pair<const char*, const char*>{"EDTA 0.01 mol/L", "E-26-118"},
        std::pair<const char*, const char*>{"calcium standard 0.01 mol/L", "CS-26-041"}}) {
    if (store.load_titrant(name))
      continue;  // the lab's own record stays
    store::TitrantRecord t;
    t.name = name;
    t.nominal_conc_mol_per_l = 0.0100;
    t.lot = lot;
    t.prepared_utc = method::format_utc(now - std::chrono::days{3});
    if (auto r = store.save_titrant(t); !r)
      return r.error();
  }
  // The calcium standard's titer from the day before, as in `veq demo`.
  if (auto r = method::record_titer(store, "calcium standard 0.01 mol/L",
                                    {0.010002, 0.009998, 0.010001}, now - std::chrono::days{1});
      !r)
    return r.error();
  return {};
}

const char* demo_series_text() {
  return cli::demo::kSeries;
}

}  // namespace veq::ui
