// A simulated bench with a rack, in memory and in virtual time, wired as the
// instruments of a series: the set-up `veq demo` and `veq series run` share.
#pragma once

#include <map>
#include <memory>
#include <string>

#include "controller/series/series_runner.hpp"
#include "drivers/device_link.hpp"
#include "simulator/bench.hpp"

namespace veq::cli {

struct SimulatedRack {
  drivers::VirtualClock clock;
  std::unique_ptr<simulator::SimulatedBench> bench;
  std::map<std::string, std::unique_ptr<drivers::DeviceLink>> links;
  std::unique_ptr<drivers::BuretteClient> burette, second_burette;
  std::unique_ptr<drivers::PotentialSensorClient> sensor;
  std::unique_ptr<drivers::AuxiliaryDoserClient> doser;
  std::unique_ptr<drivers::SampleChangerClient> changer;
  std::unique_ptr<drivers::BalanceClient> balance;
  std::unique_ptr<drivers::StirrerClient> stirrer;
  std::unique_ptr<series::SeriesInstruments> instruments;

  /// Builds the bench and identifies every device. Burettes are "burette 1"
  /// and (with a second titrant) "burette 2"; the doser's pumps are "doser 1"
  /// (buffer), "doser 2" (acid), "doser 3" (base), "doser 4" (masking agent),
  /// "doser 5" (indicator), "doser 6" (water), the names methods use.
  Result<void> build(const simulator::Scenario& scenario) {
    bench = std::make_unique<simulator::SimulatedBench>(scenario, clock);
    auto link = [&](drivers::MemoryTransport& line,
                    const std::string& name) -> drivers::DeviceLink& {
      links[name] = std::make_unique<drivers::DeviceLink>(line, clock, name);
      return *links[name];
    };
    burette = std::make_unique<drivers::BuretteClient>(link(bench->burette_line(), "burette 1"));
    second_burette =
        std::make_unique<drivers::BuretteClient>(link(bench->second_burette_line(), "burette 2"));
    sensor = std::make_unique<drivers::PotentialSensorClient>(
        link(bench->electrode_line(), "electrode"));
    doser = std::make_unique<drivers::AuxiliaryDoserClient>(
        link(bench->auxiliary_doser_line(), "reagent doser"));
    changer = std::make_unique<drivers::SampleChangerClient>(
        link(bench->sample_changer_line(), "sample changer"));
    balance = std::make_unique<drivers::BalanceClient>(link(bench->balance_line(), "balance"));
    stirrer = std::make_unique<drivers::StirrerClient>(link(bench->stirrer_line(), "stirrer"));
    std::string silent;
    auto answers = [&silent](const auto& identified) {
      if (!identified && silent.empty())
        silent = identified.error().message;
    };
    answers(burette->identify());
    if (scenario.second_titrant.present)
      answers(second_burette->identify());
    answers(sensor->identify());
    answers(doser->identify());
    answers(changer->identify());
    answers(balance->identify());
    answers(stirrer->identify());
    if (!silent.empty())
      return make_error(ErrorKind::disconnected, "a simulated device does not answer: " + silent);
    instruments = std::make_unique<series::SeriesInstruments>(
        series::SeriesInstruments{clock, *sensor, {}, {}});
    instruments->burettes["burette 1"] = burette.get();
    if (scenario.second_titrant.present)
      instruments->burettes["burette 2"] = second_burette.get();
    const std::pair<const char*, drivers::Reagent> pumps[] = {
        {"doser 1", drivers::Reagent::buffer},    {"doser 2", drivers::Reagent::acid},
        {"doser 3", drivers::Reagent::base},      {"doser 4", drivers::Reagent::masking_agent},
        {"doser 5", drivers::Reagent::indicator}, {"doser 6", drivers::Reagent::water}};
    for (const auto& [name, reagent] : pumps)
      instruments->pumps[name] = series::Pump{doser.get(), reagent};
    instruments->changer = changer.get();
    instruments->balance = balance.get();
    instruments->stirrer = stirrer.get();
    return {};
  }
};

}  // namespace veq::cli
