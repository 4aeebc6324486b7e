// A series: the queue of a rack run unattended. Samples in replicates with
// their own sizes, and beside them the entries that make the samples'
// results trustworthy: electrode conditioning, calibration, a gravimetric
// burette check, titer determination against a primary standard, blanks and
// check standards. Plain data; series_file.hpp reads and writes it as text,
// series_runner.hpp runs it.
#pragma once

#include <optional>
#include <string>
#include <string_view>
#include <vector>

namespace veq::series {

/// What an entry of the queue is (stored by name: append-only list).
enum class EntryKind : int {
  sample = 1,
  blank = 2,           ///< water and reagents through the method: the blank volume
  titer = 3,           ///< a weighed primary standard titrated: the titrant's titer
  calibration = 4,     ///< the electrode in 2 to 5 standards: slope and E0
  conditioning = 5,    ///< one titration at the start to condition the electrode; no result
  burette_check = 6,   ///< water delivered onto the balance: ISO 8655-6 gravimetric test
  check_standard = 7,  ///< a solution of known content, run every N samples
};
/// "sample", "blank", "titer", "calibration", "conditioning", "burette check",
/// "check standard"
const char* entry_kind_name(EntryKind kind);
std::optional<EntryKind> entry_kind_from_name(std::string_view name);

/// How much of the sample one replicate takes: an aliquot by volume or a
/// weighed mass (typed from the weighing record).
struct Portion {
  double aliquot_ml = 0.0;  ///< mL; 0 for a weighed portion
  double mass_g = 0.0;      ///< g; 0 for an aliquot
  /// The mass is read from the balance when the portion is weighed
  /// (weighing.hpp) before the series runs; until then, and if the balance
  /// never settled, mass_g is 0 and the determination cannot be made.
  bool from_balance = false;
  bool operator==(const Portion&) const = default;
};

struct Entry {
  EntryKind kind = EntryKind::sample;
  /// Sample identity (sample, check standard) or a label of the lab's choice.
  std::string id;
  /// Method by name, and version (0: the latest stored version). Sample,
  /// blank, titer, conditioning and check standard entries titrate with it.
  std::string method;
  int method_version = 0;
  /// Sample-changer positions, one per determination in order; positions
  /// beyond the replicates are spares for an extra replicate or a repeat.
  std::vector<int> positions;
  /// Replicates to run; 0: the method's own number.
  int replicates = 0;
  /// One portion per replicate (a single portion holds for all).
  std::vector<Portion> portions;
  /// Final volume over original volume or mass of a dilution made before the
  /// portion was taken; 1: none.
  double dilution_factor = 1.0;
  /// Density of the original sample, g/mL (for a conversion between mass and
  /// volume in the result); 0: unknown.
  double density_g_per_ml = 0.0;

  // titer
  std::string titrant;  ///< the titrant whose titer is determined
  std::string standard = "calcium carbonate";
  double standard_molar_mass_g_per_mol = 0.0;
  double standard_purity_percent = 100.0;
  double titrant_per_standard = 1.0;  ///< mol titrant per mol standard

  // calibration
  std::string electrode;  ///< the indication name methods use
  std::vector<double> standard_conc_mol_per_l;
  int charge = 2;                        ///< charge of the ion the electrode senses
  double settle_limit_mv_per_min = 0.5;  ///< drift below which a standard's reading is taken
  double longest_wait_s = 180.0;

  // burette check
  std::string burette;  ///< burette identity
  double nominal_volume_ml = 0.0;
  double test_volume_ml = 0.0;
  int deliveries = 5;
  double water_temperature_c = 20.0;

  // check standard
  double expected_value = 0.0;     ///< in expected_unit
  std::string expected_unit;       ///< a result unit; must be the method's result unit
  double tolerance_percent = 2.0;  ///< largest deviation from the expected value, %

  bool operator==(const Entry&) const = default;
};

struct Series {
  std::string name;
  std::string description;
  /// A check standard entry is run after every this many sample entries
  /// (one position of its list each time) and once at the end; 0: only where
  /// the queue places it.
  int check_standard_every = 0;
  std::vector<Entry> entries;
  bool operator==(const Series&) const = default;
};

}  // namespace veq::series
