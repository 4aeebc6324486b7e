// A whole series on one simulated bench with a rack (burette, electrode,
// reagent doser, sample changer, balance, stirrer, in memory, virtual time)
// and an in-memory store holding the methods and titrants: the set-up shared
// by the series tests.
#pragma once

#include <gtest/gtest.h>

#include <memory>
#include <string>
#include <utility>

#include "controller/method/method_file.hpp"
#include "controller/method/stored_methods.hpp"
#include "controller/series/series_file.hpp"
#include "controller/series/series_runner.hpp"
#include "controller/store/sqlite_store.hpp"
#include "drivers/device_link.hpp"
#include "simulator/bench.hpp"

namespace veq::series::testing {

/// Invented scenario: the Birchfield waterworks' laboratory. Calcium at pH 10
/// (1:1 model, log K 10.65 of CaY as in the demo scenario), EDTA labelled
/// 0.0100 mol/L but truly 0.00985 mol/L, and a blank of 2 µmol of calcium in
/// every vessel (a trace in the buffer): the hidden truths that titer and
/// blank must find.
inline const char* kScenario = R"json({
  "name": "Birchfield waterworks, calcium series (invented)",
  "seed": 41,
  "sample": {"metal": "calcium", "charge": 2, "metal_conc_mol_per_l": 0.002, "volume_ml": 50.0,
             "ph": 10.0, "log10_formation_constant": 10.65, "blank_metal_mol": 2.0e-6},
  "titrant": {"name": "EDTA", "label_conc_mol_per_l": 0.0100, "true_conc_mol_per_l": 0.00985,
              "pka": [0.0, 1.5, 2.00, 2.69, 6.13, 10.37]},
  "burette": {"cylinder_ml": 20.0, "steps_per_cylinder": 40000, "max_rate_ml_per_min": 40.0,
              "max_dose_ml": 20.0},
  "electrode": {"e0_mv": 150.0, "slope_percent": 98.0, "noise_mv": 0.05, "response_time_s": 1.0},
  "balance": {"receives_burette": false},
  "sample_changer": {"positions": 40},
  "rack": [
    {"position": 1, "label": "conditioning", "metal_conc_mol_per_l": 0.002},
    {"position": 2, "label": "Ca 0.1 mmol/L", "metal_conc_mol_per_l": 0.0001, "blank_metal_mol": 0.0},
    {"position": 3, "label": "Ca 1 mmol/L", "metal_conc_mol_per_l": 0.001, "blank_metal_mol": 0.0},
    {"position": 4, "label": "Ca 10 mmol/L", "metal_conc_mol_per_l": 0.01, "blank_metal_mol": 0.0},
    {"position": 5, "label": "burette check", "on_balance": true},
    {"position": 6, "label": "CaCO3 1", "mass_g": 0.01500, "purity_percent": 99.95},
    {"position": 7, "label": "CaCO3 2", "mass_g": 0.01480, "purity_percent": 99.95},
    {"position": 8, "label": "CaCO3 3", "mass_g": 0.01520, "purity_percent": 99.95},
    {"position": 9, "label": "blank 1", "metal_mol": 1.0e-12},
    {"position": 10, "label": "blank 2", "metal_mol": 1.0e-12},
    {"position": 11, "label": "well 1", "metal_conc_mol_per_l": 0.00180},
    {"position": 12, "label": "well 1", "metal_conc_mol_per_l": 0.00180},
    {"position": 13, "label": "well 1", "metal_conc_mol_per_l": 0.00180},
    {"position": 14, "label": "well 2", "metal_conc_mol_per_l": 0.00250},
    {"position": 15, "label": "well 2", "metal_conc_mol_per_l": 0.00250},
    {"position": 16, "label": "well 2", "metal_conc_mol_per_l": 0.00250},
    {"position": 17, "label": "check 2 mmol/L", "metal_conc_mol_per_l": 0.00200},
    {"position": 18, "label": "check 2 mmol/L", "metal_conc_mol_per_l": 0.00200}
  ]
})json";

/// The method every titrating entry uses: direct titration of calcium with
/// EDTA at pH 10 with a calcium electrode.
inline const char* kMethod = R"(
[method]
name = calcium in well water
replicates = 2
[titrant]
name = EDTA 0.01 mol/L
burette = burette 1
[reagent]
name = ammonia buffer pH 10
doser = doser 1
[indication]
kind = electrode
name = calcium electrode 1
needs calibration = yes
[result]
analyte = calcium
molar mass = 40.078 g/mol
analyte per titrant = 1
unit = mmol/L
lowest = 0.5 mmol/L
highest = 5 mmol/L
largest replicate difference = 1 %
[step]
kind = add reagent
reagent = ammonia buffer pH 10
volume = 2 mL
[step]
kind = wait
duration = 10 s
stirrer speed = 400 rpm
[step]
kind = titrate
titrant = EDTA 0.01 mol/L
dosing = adaptive increments
largest volume = 20 mL
volume past endpoint = 1 mL
[step]
kind = evaluate
endpoint method = derivative
expected endpoint = 0.05 to 19 mL
[step]
kind = rinse
)";

/// The whole series: every entry kind.
inline const char* kSeries = R"(
[series]
name = Birchfield wells, test series
check standard every = 2
[conditioning]
method = calcium in well water
positions = 1
aliquots = 50 mL
[calibration]
electrode = calcium electrode 1
standards = 0.0001, 0.001, 0.01 mol/L
positions = 2, 3, 4
[burette check]
burette = burette 1
nominal volume = 20 mL
test volume = 10 mL
deliveries = 4
water temperature = 21 °C
positions = 5
[blank]
method = calcium in well water
positions = 9, 10
aliquots = 50 mL
[titer]
titrant = EDTA 0.01 mol/L
method = calcium in well water
standard molar mass = 100.0869 g/mol
purity = 99.95 %
masses = 0.01500, 0.01480, 0.01520 g
positions = 6, 7, 8
[sample]
id = well 1
method = calcium in well water
positions = 11, 12, 13
aliquots = 50 mL
[sample]
id = well 2
method = calcium in well water
positions = 14, 15, 16
aliquots = 50 mL
[check standard]
id = check 2 mmol/L
method = calcium in well water
positions = 17, 18
replicates = 1
aliquots = 50 mL
expected = 2 mmol/L
tolerance = 1.5 %
)";

struct SeriesBench {
  simulator::Scenario scenario;
  drivers::VirtualClock clock;
  std::unique_ptr<simulator::SimulatedBench> bench;
  std::unique_ptr<drivers::DeviceLink> burette_link, sensor_link, doser_link, changer_link,
      balance_link, stirrer_link;
  std::unique_ptr<drivers::BuretteClient> burette;
  std::unique_ptr<drivers::PotentialSensorClient> sensor;
  std::unique_ptr<drivers::AuxiliaryDoserClient> doser;
  std::unique_ptr<drivers::SampleChangerClient> changer;
  std::unique_ptr<drivers::BalanceClient> balance;
  std::unique_ptr<drivers::StirrerClient> stirrer;
  std::unique_ptr<store::SqliteStore> store;
  std::unique_ptr<SeriesInstruments> instruments;

  explicit SeriesBench(const std::string& scenario_json = kScenario,
                       const std::string& db = ":memory:") {
    auto s = simulator::parse_scenario(scenario_json, "series scenario");
    EXPECT_TRUE(s.has_value()) << (s ? "" : s.error().message);
    scenario = *s;
    bench = std::make_unique<simulator::SimulatedBench>(scenario, clock);
    auto link = [&](drivers::MemoryTransport& line, const char* name) {
      return std::make_unique<drivers::DeviceLink>(line, clock, name);
    };
    burette_link = link(bench->burette_line(), "burette");
    sensor_link = link(bench->electrode_line(), "electrode");
    doser_link = link(bench->auxiliary_doser_line(), "auxiliary_doser");
    changer_link = link(bench->sample_changer_line(), "sample_changer");
    balance_link = link(bench->balance_line(), "balance");
    stirrer_link = link(bench->stirrer_line(), "stirrer");
    burette = std::make_unique<drivers::BuretteClient>(*burette_link);
    sensor = std::make_unique<drivers::PotentialSensorClient>(*sensor_link);
    doser = std::make_unique<drivers::AuxiliaryDoserClient>(*doser_link);
    changer = std::make_unique<drivers::SampleChangerClient>(*changer_link);
    balance = std::make_unique<drivers::BalanceClient>(*balance_link);
    stirrer = std::make_unique<drivers::StirrerClient>(*stirrer_link);
    EXPECT_TRUE(burette->identify().has_value());
    EXPECT_TRUE(sensor->identify().has_value());
    EXPECT_TRUE(doser->identify().has_value());
    EXPECT_TRUE(changer->identify().has_value());
    EXPECT_TRUE(balance->identify().has_value());
    EXPECT_TRUE(stirrer->identify().has_value());
    auto opened = store::SqliteStore::open(db);
    EXPECT_TRUE(opened.has_value()) << (opened ? "" : opened.error().message);
    store = std::move(*opened);
    instruments = std::make_unique<SeriesInstruments>(SeriesInstruments{clock, *sensor, {}, {}});
    instruments->burettes["burette 1"] = burette.get();
    instruments->pumps["doser 1"] = Pump{doser.get(), drivers::Reagent::buffer};
    instruments->changer = changer.get();
    instruments->balance = balance.get();
    instruments->stirrer = stirrer.get();
  }

  /// Stores the method and the titrant as the lab made them.
  void prepare_lab(const std::string& method_text = kMethod) {
    auto m = method::parse_method(method_text, "test method");
    ASSERT_TRUE(m.has_value()) << (m ? "" : m.error().message);
    ASSERT_TRUE(method::save_method(*store, *m).has_value());
    store::TitrantRecord t;
    t.name = "EDTA 0.01 mol/L";
    t.nominal_conc_mol_per_l = 0.0100;
    t.lot = "lot 26-118";
    t.prepared_utc = "2026-11-30T08:00:00.000Z";
    ASSERT_TRUE(store->save_titrant(t).has_value());
  }

  SeriesOutcome run(const std::string& series_text = kSeries, SeriesObserver* observer = nullptr,
                    const std::atomic<bool>* abort = nullptr) {
    auto s = parse_series(series_text, "test series");
    EXPECT_TRUE(s.has_value()) << (s ? "" : s.error().message);
    SeriesStores stores{*store, *store, *store};
    SeriesOptions options;
    options.start_time = method::parse_utc("2026-12-03T07:00:00Z").value();
    return run_series(*s, series_text, *instruments, stores, options, observer, abort);
  }
};

}  // namespace veq::series::testing
