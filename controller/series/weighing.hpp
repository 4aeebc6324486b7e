// Weighing a series' portions on the connected balance before the rack
// starts: for every portion the series file marks "masses = balance", the
// operator is asked to put the empty vessel on the pan (tared), then to add
// the portion; the stable net mass is written into the series. A balance
// that does not settle leaves that portion without a mass: its
// determination then fails alone and the series goes on.
#pragma once

#include <functional>
#include <string>
#include <vector>

#include "controller/series/series.hpp"
#include "drivers/balance_client.hpp"
#include "drivers/clock.hpp"

namespace veq::series {

struct WeighingOutcome {
  int weighed = 0;                 ///< portions given their mass
  int failed = 0;                  ///< portions left without one (balance unstable, refused tare)
  std::vector<std::string> notes;  ///< one line per portion: what was read or why not
};

/// `ask` shows an instruction and returns when the operator has done it
/// (the command line waits for Enter; a test places the mass).
/// After the balance first calls a reading stable, `settle_s` more seconds
/// pass before the tare and before the mass is read: a balance calls a
/// reading stable within its stability band, while the last tenths of a
/// milligram still creep (10 s: common practice for an analytical balance).
WeighingOutcome weigh_portions(Series& series, drivers::BalanceClient& balance,
                               drivers::Clock& clock,
                               const std::function<void(const std::string&)>& ask,
                               double settle_s = 10.0);

}  // namespace veq::series
