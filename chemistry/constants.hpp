// The constants library: acid constants of titrants, auxiliary ligands and
// indicators, metal complex and hydrolysis constants, each with its source,
// temperature and ionic strength. The data live in chemistry/data/constants.json
// (human readable; the file says how to add a value); this header parses that
// text and builds chemical systems from it. Pure computation: the caller hands in
// the text (constants_file.hpp reads a file path).
#pragma once

#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include "chemistry/equilibrium.hpp"
#include "common/result.hpp"

namespace veq::chemistry {

/// One published constant and where it comes from.
struct ConstantRecord {
  double log10_beta = 0.0;                ///< overall formation constant, log10 (mol/L scale)
  double temperature_c = 25.0;            ///< degC at which it was measured
  double ionic_strength_mol_per_l = 0.0;  ///< medium ionic strength, mol/L
  std::string source;                     ///< key of ConstantsLibrary::sources
  bool recalled_from_memory = false;      ///< typed from memory, not copied from the source
  std::string note;
};

/// m M + n H2O = Mm(OH)n + n H+ (log10_beta is the hydrolysis constant *beta).
struct HydrolysisConstant {
  int metals = 1;
  int hydroxide = 1;
  ConstantRecord value;
};

struct MetalEntry {
  std::string name;  ///< e.g. "Ca", "Fe(III)"
  int charge = 2;    ///< charge of the free aquo ion
  std::vector<HydrolysisConstant> hydrolysis;
};

/// L + n H+ = HnL.
struct ProtonationConstant {
  int protons = 1;
  ConstantRecord value;
};

/// m M + l L + p H+ = MmLlHp (p < 0 for a hydroxo complex such as MOHY).
struct ComplexConstant {
  std::string metal;
  int metals = 1;
  int ligands = 1;
  int protons = 0;
  ConstantRecord value;
};

/// Which form of an indicator absorbs: a protonation state (protons, no metal) or
/// a 1:1 metal complex.
struct AbsorbingForm {
  std::string metal;  ///< empty for a protonated or free form
  int protons = 0;
};

/// Molar absorptivity of one form at one wavelength.
struct Absorptivity {
  AbsorbingForm form;
  double wavelength_nm = 0.0;
  double molar_absorptivity_l_per_mol_cm = 0.0;  ///< L/(mol cm)
  std::string source;
  bool recalled_from_memory = false;
  std::string note;
};

enum class LigandRole { titrant, auxiliary, masking, indicator };

struct LigandEntry {
  std::string name;  ///< e.g. "EDTA", "ammonia"
  int charge = 0;    ///< charge of the fully deprotonated form
  LigandRole role = LigandRole::auxiliary;
  std::string description;
  std::vector<ProtonationConstant> protonation;
  std::vector<ComplexConstant> complexes;
  std::vector<Absorptivity> absorptivities;

  /// Ascending pKa values derived from the protonation constants (empty when the
  /// protonation series is not complete from 1 to n protons).
  std::vector<double> pka_values() const;
  /// The 1:1 complex constant with `metal` (no protons), if listed.
  const ComplexConstant* one_to_one(std::string_view metal) const;
};

struct ConstantsLibrary {
  std::vector<std::pair<std::string, std::string>> sources;  ///< key, full citation
  ConstantRecord water;                                      ///< log10 Kw (H2O = H+ + OH-)
  std::vector<MetalEntry> metals;
  std::vector<LigandEntry> ligands;

  const MetalEntry* find_metal(std::string_view name) const;
  const LigandEntry* find_ligand(std::string_view name) const;
  /// Full citation of a source key ("" when unknown).
  std::string citation(std::string_view key) const;

  /// Parses the JSON text of a constants file; errors name the entry and field
  /// (for example "ligands[2] 'ammonia' complexes[4]: log10_beta is missing").
  static Result<ConstantsLibrary> parse(std::string_view json_text);
};

/// The library shipped with veq (chemistry/data/constants.json, compiled in).
Result<ConstantsLibrary> builtin_constants_library();

/// The text of the shipped constants file.
std::string_view builtin_constants_json();

/// What to put into a chemical system built from the library.
struct SystemRecipe {
  std::vector<std::string> metals;   ///< metal names as in the library
  std::vector<std::string> ligands;  ///< ligand names (titrant, buffer, indicator...)
  /// Include hydrolysis species of the metals. On by default: at titration pH
  /// (10 and above) hydroxo complexes lower the free metal of Zn, Cu, Pb, Al, Fe.
  bool hydrolysis = true;
};

/// Builds the system: components H+ (index 0), then the metals, then the ligands
/// in the order given; species OH-, every protonated ligand form, the metals'
/// hydrolysis species and every listed complex between the chosen metals and
/// ligands. Errors name the unknown metal or ligand.
Result<ChemicalSystem> build_system(const ConstantsLibrary& library, const SystemRecipe& recipe);

/// Name used for a complex species, e.g. "Ca(EDTA)", "Zn(ammonia)4", "H2(EDTA)",
/// "Cu2(OH)2", "Fe(III)(EDTA)(OH)".
std::string complex_name(std::string_view metal, int metals, std::string_view ligand, int ligands,
                         int protons);

const char* ligand_role_name(LigandRole role);

}  // namespace veq::chemistry
