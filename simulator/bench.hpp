// A simulated bench for one scenario: a virtual burette and electrode sharing
// one vessel with an auxiliary doser, a photometer, a balance, a stirrer and a
// sample changer, each reachable through its own in-memory transport in
// virtual time.
#pragma once

#include <memory>

#include "drivers/memory_transport.hpp"
#include "simulator/scenario.hpp"
#include "simulator/virtual_balance.hpp"
#include "simulator/virtual_burette.hpp"
#include "simulator/virtual_doser.hpp"
#include "simulator/virtual_electrode.hpp"
#include "simulator/virtual_photometer.hpp"
#include "simulator/virtual_sample_changer.hpp"
#include "simulator/virtual_stirrer.hpp"

namespace veq::simulator {

/// The 1:1 chemistry of a scenario's sample with the true titrant.
chemistry::OneToOneTitration scenario_chemistry(const Scenario& scenario);

class SimulatedBench {
 public:
  /// The clock must outlive the bench; in virtual time it is the run's clock.
  SimulatedBench(const Scenario& scenario, drivers::Clock& clock);

  drivers::MemoryTransport& burette_line() { return burette_line_; }
  drivers::MemoryTransport& electrode_line() { return electrode_line_; }
  VirtualBurette& burette() { return burette_; }
  VirtualElectrode& electrode() { return electrode_; }
  drivers::MemoryTransport& auxiliary_doser_line() { return doser_line_; }
  drivers::MemoryTransport& photometer_line() { return photometer_line_; }
  drivers::MemoryTransport& balance_line() { return balance_line_; }
  drivers::MemoryTransport& stirrer_line() { return stirrer_line_; }
  drivers::MemoryTransport& sample_changer_line() { return changer_line_; }
  VirtualAuxiliaryDoser& auxiliary_doser() { return doser_; }
  VirtualPhotometer& photometer() { return photometer_; }
  VirtualBalance& balance() { return balance_; }
  VirtualStirrer& stirrer() { return stirrer_; }
  VirtualSampleChanger& sample_changer() { return changer_; }

  /// Pulls the cables: every line reports disconnected from now on (until
  /// a host reopens it, see drivers::MemoryTransport::reopen).
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
  VirtualAuxiliaryDoser doser_;
  VirtualPhotometer photometer_;
  VirtualBalance balance_;
  VirtualStirrer stirrer_;
  VirtualSampleChanger changer_;
  drivers::MemoryTransport doser_line_;
  drivers::MemoryTransport photometer_line_;
  drivers::MemoryTransport balance_line_;
  drivers::MemoryTransport stirrer_line_;
  drivers::MemoryTransport changer_line_;
};

}  // namespace veq::simulator
