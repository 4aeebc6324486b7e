// The simulated bench of a scenario served over pseudo-terminals in real time
// (optionally faster by a time-scale factor): a host reaches the virtual
// burette and electrode through serial ports, byte for byte as it would reach
// real instruments. Used by `veq-sim` and, in-process, by `veq demo`.
#pragma once

#include <functional>
#include <memory>
#include <string>
#include <vector>

#include "common/result.hpp"
#include "simulator/bench.hpp"
#include "simulator/scenario.hpp"

namespace veq::simulator {

struct PseudoTerminalBenchOptions {
  /// Device seconds per real second (> 0). 1 is real time. The host must run
  /// its own drivers::ScaledClock with the same factor so that both ends agree
  /// on dosing times, settling and the host-silence stop. At 20 a demo
  /// titration of about ten minutes takes half a minute; far above 50 the
  /// burette's 3 s host-silence stop shrinks to tens of real milliseconds and
  /// a busy machine may trip it.
  double time_scale = 1.0;
};

/// A virtual burette and electrode (one SimulatedBench sharing one
/// drivers::ScaledClock) served on their own thread, each over its own
/// pseudo-terminal. Every device call runs on that thread; the accessors
/// below are safe from any thread.
class PseudoTerminalBench {
 public:
  /// Opens both pseudo-terminals and starts serving. When it returns, both
  /// lines are raw (no echo, no line editing) and their device side is held
  /// open, so a host may open a port and write at once: bytes that arrive
  /// before the serving thread reads wait in the line. Errors: invalid_input
  /// for a time scale that is not a positive finite number, io if the
  /// operating system refuses a pseudo-terminal.
  static Result<std::unique_ptr<PseudoTerminalBench>> start(
      const Scenario& scenario, const PseudoTerminalBenchOptions& options = {});

  /// stop()
  ~PseudoTerminalBench();
  PseudoTerminalBench(const PseudoTerminalBench&) = delete;
  PseudoTerminalBench& operator=(const PseudoTerminalBench&) = delete;

  /// Serial port of the burette, e.g. "/dev/pts/7".
  const std::string& burette_port() const;
  /// Serial port of the electrode, e.g. "/dev/pts/8".
  const std::string& electrode_port() const;
  /// "serial:/dev/pts/7", for drivers::open_transport().
  std::string burette_connection() const { return "serial:" + burette_port(); }
  std::string electrode_connection() const { return "serial:" + electrode_port(); }

  double time_scale() const;
  const Scenario& scenario() const;
  /// Hidden truth: the equivalence volume as the burette's counter shows it
  /// (mL); see SimulatedBench::true_equivalence_reading_ml().
  double true_equivalence_reading_ml() const;

  /// Switches a line fault on (after_s counts device seconds since start, so
  /// 0 means at once) or off (FaultKind::none).
  void set_burette_fault(FaultPlan plan);
  void set_electrode_fault(FaultPlan plan);

  /// Runs `inspect` on the serving thread, between device calls, and waits for
  /// it: the only safe way to look at the devices' state (the burette's hidden
  /// delivered volume, whether it still moves) while hosts are talking. Call
  /// it from the thread that owns the bench, not while stop() runs.
  void with_bench(const std::function<void(SimulatedBench&)>& inspect);

  /// Pulls both cables: closes the pseudo-terminals' device side, so a host
  /// reads ErrorKind::disconnected from then on. Serving stops.
  void disconnect();

  /// Stops serving and joins the thread. Idempotent. Afterwards the ports are
  /// gone and with_bench() runs `inspect` directly on the caller's thread.
  void stop();

  /// Problems met while serving (a failed read on a line, an exception from a
  /// device), oldest first; empty when all went well.
  std::vector<std::string> problems() const;

  class Impl;

 private:
  explicit PseudoTerminalBench(std::unique_ptr<Impl> impl);
  std::unique_ptr<Impl> impl_;
};

}  // namespace veq::simulator
