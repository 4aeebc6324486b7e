// A simulated sample and bench, read from a scenario file (JSON, described in
// docs/scenarios.md). Some values are hidden truths the controller never sees.
#pragma once

#include <cstdint>
#include <string>
#include <string_view>
#include <vector>

#include "common/result.hpp"

namespace veq::simulator {

/// The metal in the sample and how it binds the titrant (1:1 complex).
struct SampleSpec {
  std::string metal = "calcium";
  int charge = 2;                         ///< ionic charge of the free metal
  double metal_conc_mol_per_l = 0.0;      ///< true metal content (hidden truth), mol/L
  double volume_ml = 0.0;                 ///< sample volume in the vessel, mL
  double ph = 10.0;                       ///< buffered pH of the vessel
  double log10_formation_constant = 0.0;  ///< log Kf of the metal-titrant complex
  double alpha_metal = 1.0;               ///< fraction of metal free of auxiliary ligands
  /// Time constant of the complexation itself (s): 0 for metals that react at
  /// once (calcium, zinc); tens of seconds for slow ones (nickel, aluminium),
  /// whose free metal approaches equilibrium only gradually after each dose.
  double reaction_time_s = 0.0;
};

struct TitrantSpec {
  std::string name = "EDTA";
  double label_conc_mol_per_l = 0.0;  ///< what the bottle says, mol/L (given to the controller)
  double true_conc_mol_per_l = 0.0;   ///< what it really is (hidden truth), mol/L
  std::vector<double> pka;            ///< acid constants of the titrant
};

struct BuretteSpec {
  std::string model = "veq virtual burette";
  double cylinder_ml = 20.0;
  double steps_per_cylinder = 20000.0;  ///< resolution: cylinder_ml / steps per step
  double max_rate_ml_per_min = 40.0;
  double max_dose_ml = 5.0;               ///< largest single dose the device accepts
  double systematic_error_percent = 0.0;  ///< true delivery = commanded * (1 + e/100) (hidden)
  double random_error_ml = 0.0;           ///< standard deviation of each dose's error (hidden)
  double reservoir_ml = 1000.0;           ///< titrant left in the bottle
};

struct ElectrodeSpec {
  std::string model = "veq virtual millivolt meter";
  std::string electrode = "calcium ion-selective (virtual)";
  double e0_mv = 150.0;          ///< standard potential of the cell, mV
  double slope_percent = 100.0;  ///< slope as % of the Nernstian value
  double temperature_c = 25.0;
  double noise_mv = 0.1;          ///< standard deviation of Gaussian noise, mV
  double response_time_s = 2.0;   ///< first-order time constant of the response, s
  double drift_mv_per_min = 0.0;  ///< steady drift of the reference electrode, mV/min
};

/// Faults a virtual device can be told to show (append-only names).
enum class FaultKind : int { none = 0, silence = 1, garbage = 2, partial_line = 3 };

/// A fault that starts at a moment of virtual time and lasts from then on.
struct FaultPlan {
  FaultKind kind = FaultKind::none;
  double after_s = 0.0;  ///< seconds of device time before the fault begins
};

struct Scenario {
  std::string name;
  std::uint64_t seed = 1;
  SampleSpec sample;
  TitrantSpec titrant;
  BuretteSpec burette;
  ElectrodeSpec electrode;
  FaultPlan burette_fault;
  FaultPlan electrode_fault;
};

/// Parses a scenario document. Errors name the field (and line for syntax).
Result<Scenario> parse_scenario(std::string_view json_text, std::string_view source_name);
/// Reads and parses a scenario file.
Result<Scenario> load_scenario(const std::string& path);

FaultKind fault_kind_from_name(std::string_view name, bool* ok);
const char* fault_kind_name(FaultKind kind);

}  // namespace veq::simulator
