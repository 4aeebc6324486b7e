// What `veq demo` and `veq series run` do first when the store holds runs cut
// off by a crash whose burettes have not yet confirmed a stop: tell every
// burette to stop, before any other command.
#pragma once

#include <string>
#include <vector>

#include "common/result.hpp"
#include "controller/series/series_runner.hpp"
#include "controller/store/sqlite_store.hpp"
#include "drivers/burette_client.hpp"

namespace veq::cli {

/// Tells every burette of `instruments` to stop when the store says a stop
/// is owed after an interrupted run (SqliteStore::stops_owed()), and returns
/// what was done, a line per burette, for the caller to show. A run cut off by a crash may have
/// left a burette dosing (its own host-silence stop ends a dose eventually, but the controller does
/// not know when), so nothing else is sent before the stop is confirmed.
/// Each owed stop whose burette (as the run recorded it) is on this rack is
/// then marked delivered; one owed to a burette that is not here stays owed
/// and is named. Returns an error naming the burette that did not confirm:
/// the caller then starts nothing, and the stop stays owed for the next start.
inline Result<std::vector<std::string>> stop_burettes_after_interruption(
    series::SeriesInstruments& instruments, store::SqliteStore& store) {
  std::vector<std::string> said;
  auto owed = store.stops_owed();
  if (!owed)
    return owed.error();
  if (owed->empty())
    return said;
  for (const auto& [name, burette] : instruments.burettes) {
    if (burette == nullptr)
      continue;
    if (auto stopped = burette->stop(); !stopped) {
      return make_error(stopped.error().kind,
                        name + " did not confirm the stop owed after " +
                            std::to_string(owed->size()) +
                            " interrupted run(s) (it stays owed): " + stopped.error().message);
    }
    said.push_back(name + " told to stop after an interrupted run");
  }
  for (const auto& stop : *owed) {
    bool here = false;
    for (const auto& [name, burette] : instruments.burettes)
      here = here || (burette != nullptr && burette->describe() == stop.burette);
    if (!here) {
      said.push_back("run " + std::to_string(stop.run_id) + " owes a stop to '" + stop.burette +
                     "', which is not on this rack: it stays owed");
      continue;
    }
    if (auto delivered = store.stop_delivered(stop.run_id); !delivered)
      return delivered.error();
  }
  return said;
}

}  // namespace veq::cli
