#include "controller/series/weighing.hpp"

#include <cstdio>

namespace veq::series {

namespace {

std::string grams(double g) {
  char text[32];
  std::snprintf(text, sizeof text, "%.4f g", g);
  return text;
}

}  // namespace

WeighingOutcome weigh_portions(Series& series, drivers::BalanceClient& balance,
                               drivers::Clock& clock,
                               const std::function<void(const std::string&)>& ask,
                               double settle_s) {
  WeighingOutcome out;
  for (auto& entry : series.entries) {
    for (std::size_t i = 0; i < entry.portions.size() && i < entry.positions.size(); ++i) {
      Portion& p = entry.portions[i];
      if (!p.from_balance || p.mass_g > 0.0)
        continue;
      const std::string what = std::string(entry_kind_name(entry.kind)) + " '" + entry.id +
                               "', position " + std::to_string(entry.positions[i]);
      auto fail = [&](const std::string& why) {
        ++out.failed;
        out.notes.push_back(what + ": no mass (" + why + ")");
      };
      ask("Put the empty vessel for " + what + " on the balance.");
      // A tare is taken only on a settled pan: wait for it first.
      if (auto settled = balance.read_stable(); !settled) {
        fail("the empty vessel did not settle: " + settled.error().message);
        continue;
      }
      clock.sleep_for(drivers::from_seconds(settle_s));
      if (auto tared = balance.tare(); !tared) {
        fail("tare refused: " + tared.error().message);
        continue;
      }
      ask("Add the portion for " + what + ".");
      if (auto settled = balance.read_stable(); !settled) {
        fail("the balance did not settle: " + settled.error().message);
        continue;
      }
      clock.sleep_for(drivers::from_seconds(settle_s));
      auto reading = balance.read_stable();
      if (!reading) {
        fail("the balance did not settle: " + reading.error().message);
        continue;
      }
      if (!(reading->mass_g > 0.0)) {
        fail("the balance shows " + grams(reading->mass_g) + ": nothing was added");
        continue;
      }
      p.mass_g = reading->mass_g;
      ++out.weighed;
      out.notes.push_back(what + ": " + grams(p.mass_g));
    }
  }
  return out;
}

}  // namespace veq::series
