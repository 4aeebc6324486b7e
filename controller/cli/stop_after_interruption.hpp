// What `veq demo` and `veq series run` do first when the store found runs cut
// off by a crash: tell every burette to stop, before any other command.
#pragma once

#include <cstdio>
#include <string>

#include "common/result.hpp"
#include "controller/series/series_runner.hpp"
#include "drivers/burette_client.hpp"

namespace veq::cli {

/// Tells every burette of `instruments` to stop when `interrupted_runs` > 0,
/// printing one line per burette. A run cut off by a crash may have left a
/// burette dosing (its own host-silence stop ends a dose eventually, but
/// the controller does not know when), so nothing else is sent before it
/// has confirmed the stop. Returns an error naming the burette that did not
/// confirm: the caller then starts nothing.
inline Result<void> stop_burettes_after_interruption(series::SeriesInstruments& instruments,
                                                     int interrupted_runs) {
  if (interrupted_runs <= 0)
    return {};
  for (const auto& [name, burette] : instruments.burettes) {
    if (burette == nullptr)
      continue;
    if (auto stopped = burette->stop(); !stopped) {
      return make_error(stopped.error().kind,
                        name + " did not confirm the stop asked for after " +
                            std::to_string(interrupted_runs) +
                            " interrupted run(s): " + stopped.error().message);
    }
    std::printf("%s told to stop after an interrupted run\n", name.c_str());
  }
  std::fflush(stdout);
  return {};
}

}  // namespace veq::cli
