// A method: what a lab does to one sample, as an ordered list of steps
// (add a reagent, bring the pH to a target, wait, titrate, back-titrate,
// evaluate, rinse), the titrants and reagents it needs and where they sit,
// the indication it titrates by, the result it computes and the limits the
// result must keep. Plain data: method_file.hpp reads and writes it as text,
// stored_methods.hpp keeps its versions, readiness.hpp checks that titers
// and calibrations are valid before a series uses it.
#pragma once

#include <cstddef>
#include <optional>
#include <string>
#include <string_view>
#include <variant>
#include <vector>

#include <nlohmann/json.hpp>

namespace veq::method {

/// A titrant the method doses, and the burette that holds it.
struct TitrantUse {
  std::string name;     ///< as the titrant is stored ("EDTA 0.01 mol/L")
  std::string burette;  ///< burette identity in the instrument set-up
  bool operator==(const TitrantUse&) const = default;
};

/// An auxiliary reagent (buffer, masking agent, acid, base), and the doser
/// that holds it.
struct ReagentUse {
  std::string name;
  std::string doser;  ///< auxiliary doser identity in the instrument set-up
  bool operator==(const ReagentUse&) const = default;
};

/// How the endpoint is seen (stored in method files as names: append-only).
enum class IndicationKind : int {
  electrode = 1,   ///< potential of an ion-selective or redox electrode, mV
  photometer = 2,  ///< absorbance of a metal indicator
};
const char* indication_kind_name(IndicationKind kind);

struct Indication {
  IndicationKind kind = IndicationKind::electrode;
  std::string name;  ///< electrode or photometer identity, as its calibrations name it
  /// A valid (accepted, unexpired) calibration must exist before a run.
  bool needs_calibration = true;
  bool operator==(const Indication&) const = default;
};

/// Where a result's titrant volume starts counting (stored in method files
/// as names: append-only).
enum class CountedFrom : int {
  /// The stage's own titration from its start: its endpoint as the burette
  /// counted it in that stage alone (what a one-stage method always did).
  stage_start = 1,
  /// The endpoint of the stage before, with the same titrant: the titrant
  /// dosed past that endpoint stays in the vessel and reacts in this stage,
  /// so it counts here (the second metal of a two-stage titration).
  previous_endpoint = 2,
  /// The start of the first stage, every stage with the same titrant: the
  /// titrant for all metals titrated up to this stage's endpoint together.
  first_stage_start = 3,
};
const char* counted_from_name(CountedFrom from);
/// "stage start", "previous endpoint", "first stage start"
std::vector<std::string_view> counted_from_names();

/// A result a run computes from an endpoint, and the limits it must keep.
/// A method has one, or one per metal when it titrates in stages: titrate
/// steps (or an add titrant step with its back titrate step) each followed
/// by its evaluate step are stages 1, 2, ... in the order they run.
struct ResultRule {
  std::string analyte;  ///< metal determined ("calcium", "nickel"); unique within a method
  double molar_mass_g_per_mol = 0.0;
  /// Stoichiometry: mol analyte per mol titrant at the endpoint (1 for EDTA
  /// with a divalent metal).
  double analyte_per_titrant = 1.0;
  /// Result unit, one of result_units().
  std::string unit = "mmol/L";
  /// Acceptance range in `unit`; a result outside is flagged.
  std::optional<double> lowest;
  std::optional<double> highest;
  /// Largest difference between replicates: in percent of their mean if
  /// `replicate_difference_relative`, else in `unit`. Unset: not checked.
  std::optional<double> largest_replicate_difference;
  bool replicate_difference_relative = true;
  /// The titration stage the result is read from, 1 for the first; 0: the
  /// last stage (a one-stage method's only one).
  int stage = 0;
  /// Which endpoint of its stage, 1 for the first in volume order, when the
  /// stage's titration passes more than one (TitrateStep::endpoints: calcium
  /// at the first break, magnesium at the second); 0: the stage's only one.
  /// Counting from the previous endpoint then starts at the endpoint before
  /// in the same curve.
  int endpoint = 0;
  CountedFrom counted_from = CountedFrom::stage_start;
  /// Analyte of an earlier result of the method whose titrant volume is
  /// subtracted: the second metal as the difference (total - first). Empty:
  /// nothing subtracted.
  std::string less;
  bool operator==(const ResultRule&) const = default;
};

/// The units a result may be given in, as controller/results.hpp names them:
/// "mol/L", "mmol/L", "mg/L", "% w/w" (mass fraction), "mg/kg".
std::vector<std::string_view> result_units();

// ---- steps ---------------------------------------------------------------

/// Add a set volume of a reagent from its auxiliary doser.
struct AddReagentStep {
  std::string reagent;
  double volume_ml = 0.0;  ///< mL
  bool operator==(const AddReagentStep&) const = default;
};

/// Bring the pH to a target within a tolerance by dosing acid or base.
struct AdjustPhStep {
  double target_ph = 7.0;
  double tolerance_ph = 0.1;
  std::string acid;  ///< reagent lowering the pH; empty if only base is dosed
  std::string base;  ///< reagent raising the pH; empty if only acid is dosed
  /// Stop with an error if acid and base together exceed this volume (mL).
  double largest_total_volume_ml = 5.0;
  bool operator==(const AdjustPhStep&) const = default;
};

/// Wait, stirring or not.
struct WaitStep {
  double duration_s = 0.0;   ///< s
  double stirrer_rpm = 0.0;  ///< stirrer speed, revolutions per minute; 0 = stirrer off
  bool operator==(const WaitStep&) const = default;
};

/// Dispense an exact volume of a titrant from its burette without titrating:
/// the known excess of EDTA before a back-titration. Counts in the result.
struct AddTitrantStep {
  std::string titrant;
  double volume_ml = 0.0;  ///< mL
  bool operator==(const AddTitrantStep&) const = default;
};

/// Titrate with a titrant. Dosing strategy names and options are those of
/// controller/dosing.hpp (dosing_kind_name, to_json(DosingPlan)); settling and
/// stop fields map onto controller::TitrationMethod.
struct TitrateStep {
  std::string titrant;
  std::string dosing = "adaptive increments";  ///< a dosing_strategy_names() entry
  /// Options of the strategy by their JSON names ("smallest_step_ml"...).
  nlohmann::json dosing_options = nlohmann::json::object();
  double initial_volume_ml = 0.0;        ///< added at once before the first reading, mL
  double largest_volume_ml = 20.0;       ///< never dose beyond this burette reading, mL
  double volume_past_endpoint_ml = 1.0;  ///< stop this far past the (last) endpoint, mL
  /// Endpoints the curve passes, one after the other (two metals bound in
  /// turn by the titrant: 2). The titration goes on until this many are
  /// found and stops past the last; results name theirs (ResultRule::endpoint).
  int endpoints = 1;
  double time_limit_s = 3600.0;      ///< stop titrating after this long, s
  double drift_limit_per_min = 1.0;  ///< settled when |drift| is below, signal units/min
  double settling_window_s = 10.0;   ///< drift computed over this window, s
  double shortest_wait_s = 3.0;      ///< after each dose, s
  double longest_wait_s = 60.0;      ///< then the reading is taken as it is, s
  bool operator==(const TitrateStep&) const = default;
};

/// A second titration with another titrant: the excess of an earlier
/// AddTitrantStep is titrated back (EDTA excess with a zinc or magnesium
/// standard). The result is then (excess added - titrated back).
struct BackTitrateStep : TitrateStep {
  bool operator==(const BackTitrateStep&) const = default;
};

/// Find the endpoint of the titration just before, with a method of
/// detection::evaluate() and its options.
struct EvaluateStep {
  std::string endpoint_method = "derivative";  ///< a detection::method_names() entry
  nlohmann::json options = nlohmann::json::object();
  double expected_from_ml = 0.0;  ///< expected endpoint range, mL
  double expected_to_ml = 0.0;
  bool operator==(const EvaluateStep&) const = default;
};

/// Rinse electrode, stirrer and tip.
struct RinseStep {
  std::string liquid = "water";
  double volume_ml = 10.0;  ///< per rinse, mL
  int times = 1;
  bool operator==(const RinseStep&) const = default;
};

using Step = std::variant<AddReagentStep, AdjustPhStep, WaitStep, AddTitrantStep, TitrateStep,
                          BackTitrateStep, EvaluateStep, RinseStep>;

/// The name of a step's kind as method files write it ("add reagent",
/// "adjust ph", "wait", "add titrant", "titrate", "back titrate", "evaluate",
/// "rinse").
const char* step_kind_name(const Step& step);
/// Every step kind name, in the order of the Step alternatives.
std::vector<std::string_view> step_kind_names();

/// The dosing strategy names a titrate step may use (those of
/// controller::dosing_kind_name) and the option names of their JSON form.
std::vector<std::string_view> dosing_strategy_names();
std::vector<std::string_view> dosing_option_names();

/// The step's strategy and options as one JSON object in the form of
/// controller::to_json(DosingPlan): {"kind": dosing, ...dosing_options}, ready
/// for controller::dosing_plan_from_json().
nlohmann::json dosing_plan_json(const TitrateStep& step);

struct Method;
/// Every result rule of a method: `result`, then `more_results`.
std::vector<ResultRule> result_rules(const Method& method);

/// The indices into Method::steps of the titrate and back titrate steps:
/// element k is stage k + 1.
std::vector<std::size_t> titration_stages(const std::vector<Step>& steps);

struct Method {
  std::string name;
  int version = 1;  ///< given by the store: 1, 2, 3...
  std::string description;
  int replicates = 1;  ///< determinations per sample
  std::vector<TitrantUse> titrants;
  std::vector<ReagentUse> reagents;
  Indication indication;
  /// The method's result, or the first of them when it titrates in stages
  /// and gives one per metal; entries that give one value (titer, check
  /// standard) use it.
  ResultRule result;
  /// The results after the first, in the order of the file; most methods
  /// have none. result_rules() gives all of them.
  std::vector<ResultRule> more_results;
  std::vector<Step> steps;
  bool operator==(const Method&) const = default;
};

}  // namespace veq::method
