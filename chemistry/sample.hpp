// A sample composition for speciation and curve prediction: metals, sample
// volume, pH or proton balance, buffer and auxiliary ligands, titrant, indicator,
// the signal to predict. Parsed from a small JSON document whose format is
// described in docs/chemistry.md. Pure computation: the caller gives the text.
#pragma once

#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include <nlohmann/json.hpp>

#include "common/result.hpp"

namespace veq::chemistry {

struct SampleMetal {
  std::string name;             ///< as in the constants library, e.g. "Zn"
  double conc_mol_per_l = 0.0;  ///< analytical concentration in the sample, mol/L
};

/// A buffer ligand, auxiliary complexing agent or masking agent in the sample.
struct SampleLigand {
  std::string name;              ///< as in the constants library, e.g. "ammonia"
  double total_mol_per_l = 0.0;  ///< all forms, mol/L in the sample
  /// Protons carried per formula as added (NH4Cl: 1 on ammonia); used only when
  /// pH follows from the proton balance. 0 by default: the base form.
  double protons_per_formula = 0.0;
};

struct TitrantSpec {
  std::string name = "EDTA";
  double conc_mol_per_l = 0.0;  ///< mol/L in the burette
  /// Protons per formula as added; 2 by default because EDTA titrant is made from
  /// the disodium salt Na2H2Y. Used only when pH follows from the proton balance.
  double protons_per_formula = 2.0;
};

struct IndicatorSpec {
  std::string name;             ///< e.g. "Eriochrome Black T"
  double conc_mol_per_l = 0.0;  ///< in the sample, mol/L
};

/// The predicted signal (append-only: stored and exchanged).
enum class SignalKind : int {
  p_metal = 1,     ///< pM = -log10 [M] of one metal
  potential = 2,   ///< metal ion-selective electrode, mV
  absorbance = 3,  ///< indicator absorbance at a wavelength
};

struct SignalSpec {
  SignalKind kind = SignalKind::p_metal;
  /// Metal seen by pM or the electrode; empty: the first metal of the sample.
  std::string metal;
  /// Cell potential in mV at unit activity of the metal ion (electrode only).
  double standard_potential_mv = 0.0;
  /// Electrode slope as a percentage of the Nernst slope (electrode only); 100
  /// for an ideal electrode.
  double slope_percent = 100.0;
  double temperature_c = 25.0;  ///< for the Nernst slope, degC
  double wavelength_nm = 0.0;   ///< absorbance only
  double path_length_cm = 1.0;  ///< absorbance only; 1 cm, the usual cuvette or probe
};

struct CurveRange {
  /// Last titrant volume in mL; 0 means 1.5 times the last equivalence volume,
  /// which shows the whole break and the plateau after it.
  double end_volume_ml = 0.0;
  /// Number of points; 500 resolves a break to 0.3 % of the range.
  int points = 500;
};

struct SampleComposition {
  double sample_volume_ml = 0.0;  ///< before any titrant, mL
  std::vector<SampleMetal> metals;
  /// Fixed (buffered) pH. When empty, pH follows from the proton balance with
  /// `strong_acid_mol_per_l` and the protons carried by the ligands.
  std::optional<double> ph;
  /// Strong acid added to the sample (negative: strong base), mol/L.
  double strong_acid_mol_per_l = 0.0;
  /// Buffer and auxiliary or masking ligands (the "buffer" field of the JSON
  /// document lands here too).
  std::vector<SampleLigand> ligands;
  TitrantSpec titrant;
  std::optional<IndicatorSpec> indicator;
  /// Ionic strength in mol/L for the Davies correction; empty: none.
  std::optional<double> ionic_strength_mol_per_l;
  SignalSpec signal;
  CurveRange curve;
};

/// Parses the JSON sample document; errors name the field ("metals[1].conc_mol_per_l
/// must be a number > 0").
Result<SampleComposition> parse_sample_json(std::string_view text);

/// The sample as a JSON document in the same format (for echoing inputs).
nlohmann::json to_json(const SampleComposition& sample);

const char* signal_kind_name(SignalKind kind);

}  // namespace veq::chemistry
