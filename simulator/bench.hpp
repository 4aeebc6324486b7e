// A simulated bench for one scenario: a virtual burette and electrode sharing
// one vessel with an auxiliary doser, a photometer, a balance, a stirrer and a
// sample changer, each reachable through its own in-memory transport in
// virtual time.
#pragma once

#include <array>
#include <memory>
#include <string>
#include <string_view>
#include <vector>

#include "drivers/memory_transport.hpp"
#include "simulator/scenario.hpp"
#include "simulator/vessel.hpp"
#include "simulator/virtual_balance.hpp"
#include "simulator/virtual_burette.hpp"
#include "simulator/virtual_doser.hpp"
#include "simulator/virtual_electrode.hpp"
#include "simulator/virtual_photometer.hpp"
#include "simulator/virtual_sample_changer.hpp"
#include "simulator/virtual_stirrer.hpp"

namespace veq::simulator {

/// The hidden truths of a bench at the clock's present time: what the lab
/// cannot see over the protocol and a titer, blank or burette check should
/// find. For tests and trials in the same process only.
struct BenchTruths {
  double titrant_label_conc_mol_per_l = 0.0;
  double titrant_true_conc_mol_per_l = 0.0;
  /// Each metal the sample brought (name, mol); the chemistry section's
  /// metals, or the 1:1 sample's one metal.
  std::vector<std::pair<std::string, double>> sample_metals_mol;
  /// Blank: metal of the blank metal in the vessel that the sample did not
  /// bring (scenario blank plus what the dosed reagents carried so far), mol.
  double blank_metal_mol = 0.0;
  /// Titrant in the vessel before the first dose (premixed Cu-EDTA), mol.
  double premixed_titrant_mol = 0.0;
  double titrant_delivered_ml = 0.0;  ///< truly delivered by the burette so far, mL
  double burette_systematic_error_percent = 0.0;
  double burette_random_error_ml = 0.0;
  double balance_offset_g = 0.0;
  double balance_sensitivity_error_percent = 0.0;
  /// Metal held by the indicator now, mol (chemistry section with an indicator).
  double indicator_bound_metal_mol = 0.0;
  /// Burette reading at the stoichiometric equivalence of the sample alone
  /// and of everything titratable in the vessel now (sample + blank -
  /// premixed titrant), mL, with the burette's systematic error.
  double sample_equivalence_reading_ml = 0.0;
  double vessel_equivalence_reading_ml = 0.0;
  /// pH in the vessel now: the chemistry section's equilibrium (moved by
  /// acid or base from the doser when pH follows the proton balance), or the
  /// 1:1 sample's pH (moved by acid or base through its
  /// buffer_capacity_mol_per_ph, fixed without one).
  double vessel_ph = 0.0;
  /// Rack position of the vessel the sensors read now: where the sample
  /// changer's head last came down; 0 before that (the scenario's own
  /// vessel). Everything above counts from that moment.
  int position = 0;
  /// Back-titration (second_titrant): what the second burette has truly
  /// delivered into the vessel, mL, and its counter reading at which its
  /// metal equals the first titrant left free by the vessel's metal (first
  /// titrant truly delivered - sample - blank), with its systematic error
  /// and the second titrant's true concentration, mL (0 without one).
  double second_titrant_delivered_ml = 0.0;
  double second_equivalence_reading_ml = 0.0;
};

/// What a rack position's vessel truly holds (hidden truths).
struct PositionTruths {
  int position = 0;
  bool in_rack = false;  ///< false: not in the rack, the scenario's own sample
  std::string label;
  bool standard = false;    ///< a primary standard (metal = mass * purity / M)
  bool on_balance = false;  ///< water on the balance (a burette check)
  /// Each metal the vessel holds (name, mol); a standard's metal; none for
  /// water.
  std::vector<std::pair<std::string, double>> metals_mol;
  double blank_metal_mol = 0.0;  ///< the vessel's own blank (reagents not counted), mol
  /// Burette reading at the stoichiometric equivalence of the metals above
  /// (their sum), with the burette's systematic error and the true titrant, mL.
  double equivalence_reading_ml = 0.0;
};

class SimulatedBench {
 public:
  /// The clock must outlive the bench; in virtual time it is the run's clock.
  SimulatedBench(const Scenario& scenario, drivers::Clock& clock);

  drivers::MemoryTransport& burette_line() { return burette_line_; }
  drivers::MemoryTransport& electrode_line() { return electrode_line_; }
  VirtualBurette& burette() { return burette_; }
  /// The second burette (role "second_burette"): the scenario's
  /// second_titrant for back-titrations; it delivers nothing into the
  /// vessel's chemistry without one.
  drivers::MemoryTransport& second_burette_line() { return second_burette_line_; }
  VirtualBurette& second_burette() { return second_burette_; }
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

  /// The device of a role ("burette", "electrode", "auxiliary_doser",
  /// "photometer", "balance", "stirrer", "sample_changer",
  /// "second_burette"), or nullptr.
  VirtualDevice* device(std::string_view role);
  /// Switches a line or sensor fault of a role at run time: the plan's
  /// after_s and until_s are moments of device time (after_s = now: at once);
  /// FaultKind::none clears the role's faults. False for an unknown role.
  bool set_fault(std::string_view role, FaultPlan plan);
  bool add_fault(std::string_view role, FaultPlan plan);

  /// Hidden truth: the burette counter reading (mL) at which the titrant truly
  /// delivered equals the titratable metal in the vessel now (the sample, the
  /// blank so far, less any premixed titrant), i.e. the equivalence volume as
  /// this burette would show it, with its systematic error and the titrant's
  /// true concentration. Without blank or premixed titrant: the sample's.
  double true_equivalence_reading_ml() const;
  /// Every hidden truth at the present time, of the vessel the sensors
  /// read now (see BenchTruths::position).
  BenchTruths truths() const;
  /// What a rack position's vessel holds (any position: one not in the rack
  /// holds the scenario's own sample).
  PositionTruths position_truths(int position) const;
  /// Rack position of the vessel the sensors read now (0: none lowered yet).
  int position() const;
  /// What has entered the vessel besides the sample and the titrant now.
  VesselContent additions() const;
  /// Titrant truly in the vessel now, mL (delivered since it was lowered into).
  double titrant_in_vessel_ml() const;
  /// Second titrant truly in the vessel now, mL (0 without a second_titrant).
  double second_titrant_in_vessel_ml() const;
  const Scenario& scenario() const { return scenario_; }

 private:
  /// A new vessel when the changer's head has come down since last asked.
  void follow_changer() const;
  void take_vessel(int position) const;
  /// Burette liquid that has gone onto the balance, mL.
  double on_balance_ml() const;

  Scenario scenario_;
  // The vessel the sensors read: changed by follow_changer(), which runs
  // before any device answers and from the const truths() as well.
  mutable Scenario vessel_;
  mutable int position_ = 0;
  mutable int lowerings_seen_ = 0;
  mutable bool on_balance_ = false;
  mutable double burette_zero_ml_ = 0.0;
  mutable double second_burette_zero_ml_ = 0.0;
  mutable std::array<double, 6> doser_zero_ml_{};
  mutable double balance_kept_ml_ = 0.0;  ///< delivered onto earlier on_balance vessels
  std::mutex vessel_lock_;
  mutable VesselModel truth_vessel_;  // for the indicator's share
  VirtualBurette burette_;
  VirtualBurette second_burette_;
  mutable VirtualElectrode electrode_;
  drivers::MemoryTransport burette_line_;
  drivers::MemoryTransport electrode_line_;
  VirtualAuxiliaryDoser doser_;
  mutable VirtualPhotometer photometer_;
  VirtualBalance balance_;
  VirtualStirrer stirrer_;
  mutable VirtualSampleChanger changer_;
  drivers::MemoryTransport doser_line_;
  drivers::MemoryTransport photometer_line_;
  drivers::MemoryTransport balance_line_;
  drivers::MemoryTransport stirrer_line_;
  drivers::MemoryTransport changer_line_;
  drivers::MemoryTransport second_burette_line_;
};

}  // namespace veq::simulator
