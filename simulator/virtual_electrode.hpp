// A virtual metal-ion electrode with its meter: Nernstian response to the
// free metal of the vessel's chemistry (simulator/vessel.hpp), temperature
// in the slope, other metals by the Nikolsky-Eisenman equation, mixing and
// slow complexation, first-order response lag, drift, seeded Gaussian noise
// and the sensor faults; or a stored curve replayed.
#pragma once

#include <functional>
#include <optional>
#include <vector>

#include "simulator/vessel.hpp"
#include "simulator/virtual_device.hpp"

namespace veq::simulator {

/// Nernst slope RT ln(10) / F in mV per decade at a temperature (°C), from the
/// CODATA 2018 values of R and F.
double nernst_slope_mv(double temperature_c);

/// The Nikolsky-Eisenman equation, mV:
///   E = E0 + (S / z_i) log10(a_i + sum_j K_ij a_j^(z_i / z_j))
/// with S the slope in mV per decade, a the activities (mol/L), z the charges.
double nikolsky_eisenman_mv(double e0_mv, double slope_mv, int charge, double log10_activity,
                            const std::vector<double>& coefficients,
                            const std::vector<int>& other_charges,
                            const std::vector<double>& other_log10_activities);

class VirtualElectrode final : public VirtualDevice {
 public:
  /// titrant_in_vessel_ml tells how much titrant has truly entered the vessel
  /// at the clock's present time (the burette's hidden truth).
  /// reaction_time_s: time constant of a slow complexation (0: instant).
  /// The vessel must be valid for the spec (metal and interferents known;
  /// parse_scenario checks them).
  VirtualElectrode(const ElectrodeSpec& spec, VesselModel vessel, double reaction_time_s,
                   drivers::Clock& clock, std::uint64_t seed,
                   std::function<double()> titrant_in_vessel_ml);

  /// Noise-free equilibrium potential at a titrant volume in the vessel with
  /// the present other additions (mV).
  double equilibrium_potential_mv(double titrant_ml) const;

  /// What else has entered the vessel (its titrant_ml is ignored): dilution,
  /// blank metal, acid; nothing unless set.
  void set_additions(std::function<VesselContent()> additions) {
    additions_ = std::move(additions);
  }
  /// Dips into another vessel (a sample changer's head came down): its
  /// chemistry and slow-complexation time constant from now on. The
  /// response starts afresh at the new vessel's equilibrium (an electrode
  /// rinsed and dipped settles within its response time; the lag of the
  /// move itself is not modelled). Throws if the electrode's metal or an
  /// interferent is missing (parse_scenario checks the rack's vessels).
  void set_vessel(VesselModel vessel, double reaction_time_s);
  /// Serves a stored curve instead of the chemistry: the potential is the
  /// curve at the titrant in the vessel, without lag, noise or drift.
  void set_replay(ReplaySpec replay) { replay_ = std::move(replay); }
  const ElectrodeSpec& spec() const { return spec_; }

 protected:
  drivers::protocol::Message handle(const drivers::protocol::Message& request) override;
  drivers::protocol::Message reading() override;

 private:
  double lagged_potential_mv();
  /// The reading with drift, noise and faults; false when out of range.
  bool measure(double& potential_mv);
  void find_metals();
  /// The pH the meter reports with each reading (reports_ph), noise added.
  std::optional<double> measured_ph();

  ElectrodeSpec spec_;
  mutable VesselModel vessel_;  // a cache of solved equilibria
  int metal_ = 0;
  std::vector<int> interferents_;
  std::vector<double> coefficients_;
  double reaction_time_s_;
  std::function<double()> titrant_in_vessel_ml_;
  std::function<VesselContent()> additions_;
  ReplaySpec replay_;
  double mixed_ml_ = 0.0;    ///< titrant that has reached the electrode (mixing), mL
  double reacted_ml_ = 0.0;  ///< titrant that has reacted so far (slow metals), mL
  bool started_ = false;
  double value_mv_ = 0.0;
  drivers::Duration last_time_{0};
};

}  // namespace veq::simulator
