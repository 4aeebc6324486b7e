// A simulated bench for one scenario: a virtual burette and electrode sharing
// one vessel, reachable through in-memory transports in virtual time.
#pragma once

#include <memory>

#include "drivers/memory_transport.hpp"
#include "simulator/scenario.hpp"
#include "simulator/virtual_burette.hpp"
#include "simulator/virtual_electrode.hpp"

namespace veq::simulator {

/// The 1:1 chemistry of a scenario's sample with the true titrant.
chemistry::OneToOneTitration scenario_chemistry(const Scenario& scenario);

class SimulatedBench {
 public:
  /// The clock must outlive the bench; in virtual time it is the run's clock.
  SimulatedBench(const Scenario& scenario, drivers::Clock& clock);

  drivers::Transport& burette_line() { return burette_line_; }
  drivers::Transport& electrode_line() { return electrode_line_; }
  VirtualBurette& burette() { return burette_; }
  VirtualElectrode& electrode() { return electrode_; }
  /// Pulls the cables: both lines report disconnected from now on.
  void disconnect();

  /// Hidden truth: the burette counter reading (mL) at which the titrant truly
  /// delivered equals the metal in the sample, i.e. the equivalence volume as
  /// this burette would show it, with its systematic error and the titrant's
  /// true concentration.
  double true_equivalence_reading_ml() const;
  const Scenario& scenario() const { return scenario_; }

 private:
  Scenario scenario_;
  std::mutex vessel_lock_;
  VirtualBurette burette_;
  VirtualElectrode electrode_;
  drivers::MemoryTransport burette_line_;
  drivers::MemoryTransport electrode_line_;
};

}  // namespace veq::simulator
