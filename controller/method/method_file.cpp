#include "controller/method/method_file.hpp"

#include <algorithm>
#include <cctype>
#include <charconv>
#include <cmath>
#include <fstream>
#include <map>
#include <optional>
#include <sstream>
#include <utility>
#include <vector>

#include "controller/method/section_text.hpp"
#include "detection/crossing.hpp"
#include "detection/derivative.hpp"
#include "detection/evaluate.hpp"
#include "detection/gran.hpp"
#include "detection/model_fit.hpp"
#include "detection/segments.hpp"

namespace veq::method {

namespace {

using nlohmann::json;

using namespace text;

/// Where the sections of one kind start and where each of their keys
/// stands, for errors found after the sections were read.
struct SectionLines {
  std::vector<int> start;                       ///< section line of each section
  std::vector<std::map<std::string, int>> key;  ///< line of each key of each section
  void add(const Section& section) {
    start.push_back(section.line);
    std::map<std::string, int> keys;
    for (const auto& e : section.entries)
      keys[e.key] = e.line;
    key.push_back(std::move(keys));
  }
  /// The line of a key of section i; its section's line if the key is not
  /// given, `end` if there is no such section.
  int field(std::size_t i, const std::string& name, int end) const {
    if (i < key.size()) {
      auto it = key[i].find(name);
      if (it != key[i].end())
        return it->second;
    }
    return i < start.size() ? start[i] : end;
  }
};

/// Lines of a parsed file, for the checks between sections.
struct Lines {
  SectionLines steps;
  SectionLines results;
  std::vector<int> titrant;
  std::vector<int> reagent;
  int end = 0;  ///< last line of the file
  int field(std::size_t i, const std::string& key) const { return steps.field(i, key, end); }
  int result_field(std::size_t i, const std::string& key) const {
    return results.field(i, key, end);
  }
};

TitrateStep read_titration(Reader& r) {
  TitrateStep t;
  t.titrant = r.text("titrant");
  t.dosing = r.choice("dosing", dosing_strategy_names());
  t.dosing_options = r.json_object("dosing options");
  const auto known = dosing_option_names();
  for (auto it = t.dosing_options.begin(); it != t.dosing_options.end(); ++it) {
    const int line = r.line_of("dosing options");
    if (std::find(known.begin(), known.end(), it.key()) == known.end()) {
      r.errors().add(line, "dosing options",
                     "unknown option '" + it.key() + "' (known: " + join(known) + ")");
    } else if (!it->is_number() || !std::isfinite(it->get<double>())) {
      r.errors().add(line, "dosing options", "option '" + it.key() + "' must be a number");
    } else if (it.key() != "preset_signal" && !(it->get<double>() > 0.0)) {
      r.errors().add(line, "dosing options", "option '" + it.key() + "' must be above 0");
    }
  }
  t.initial_volume_ml = r.quantity("initial volume", kVolume, 0.0, 1000.0, 0.0);
  t.largest_volume_ml = r.quantity("largest volume", kVolume, 0.0, 1000.0, std::nullopt, true);
  t.volume_past_endpoint_ml = r.quantity("volume past endpoint", kVolume, 0.0, 100.0, 1.0);
  t.endpoints = r.integer("endpoints", 1, 5, 1);
  t.time_limit_s = r.quantity("time limit", kTime, 0.0, 86400.0, 3600.0, true);
  t.drift_limit_per_min = r.quantity("drift limit", kDrift, 0.0, 1000.0, 1.0, true);
  t.settling_window_s = r.quantity("settling window", kTime, 0.0, 600.0, 10.0, true);
  t.shortest_wait_s = r.quantity("shortest wait", kTime, 0.0, 3600.0, 3.0);
  t.longest_wait_s = r.quantity("longest wait", kTime, 0.0, 3600.0, 60.0, true);
  if (t.initial_volume_ml >= t.largest_volume_ml && t.largest_volume_ml > 0.0)
    r.errors().add(r.line_of("initial volume"), "initial volume",
                   "must be below the largest volume (" + number(t.largest_volume_ml) + " mL)");
  if (t.shortest_wait_s > t.longest_wait_s)
    r.errors().add(r.line_of("shortest wait"), "shortest wait",
                   "must not exceed the longest wait (" + number(t.longest_wait_s) + " s)");
  return t;
}

const std::vector<std::string_view> kTitrateKeys = {"kind",
                                                    "titrant",
                                                    "dosing",
                                                    "dosing options",
                                                    "initial volume",
                                                    "largest volume",
                                                    "volume past endpoint",
                                                    "endpoints",
                                                    "time limit",
                                                    "drift limit",
                                                    "settling window",
                                                    "shortest wait",
                                                    "longest wait"};

ResultRule read_result(Reader& r) {
  ResultRule res;
  res.analyte = r.text("analyte");
  res.molar_mass_g_per_mol = r.quantity("molar mass", kMolarMass, 0.0, 1000.0, std::nullopt, true);
  res.analyte_per_titrant = r.quantity("analyte per titrant", kNone, 0.0, 10.0, 1.0, true);
  res.unit = r.choice("unit", result_units());
  const std::vector<Unit> result_unit = {{res.unit, 1.0}};
  for (const char* key : {"lowest", "highest"}) {
    if (Entry* e = r.find(key)) {
      auto v = r.parse_quantity(e->value, e->line, key, result_unit);
      if (v)
        (std::string(key) == "lowest" ? res.lowest : res.highest) = *v;
    }
  }
  if (res.lowest && res.highest && *res.highest <= *res.lowest)
    r.errors().add(r.line_of("highest"), "highest", "must be above lowest");
  if (Entry* e = r.find("largest replicate difference")) {
    const std::vector<Unit> either = {{"%", 1.0}, {res.unit, 1.0}};
    auto v = r.parse_quantity(e->value, e->line, e->key, either);
    if (v) {
      // "%" alone is relative; "% w/w" is the result unit itself.
      const auto unit_at = e->value.find_first_not_of("0123456789.+-eE ");
      res.replicate_difference_relative =
          unit_at != std::string::npos && normal_key(e->value.substr(unit_at)) == "%";
      res.largest_replicate_difference = *v;
      if (!(*v > 0.0))
        r.errors().add(e->line, e->key, "must be above 0");
    }
  }
  res.stage = r.integer("stage", 1, 100, 0);
  res.endpoint = r.integer("endpoint", 1, 5, 0);
  const std::string from = r.choice("counted from", counted_from_names(), "stage start");
  for (CountedFrom c :
       {CountedFrom::stage_start, CountedFrom::previous_endpoint, CountedFrom::first_stage_start})
    if (from == counted_from_name(c))
      res.counted_from = c;
  res.less = r.text("less", "");
  r.finish({"analyte", "molar mass", "analyte per titrant", "unit", "lowest", "highest",
            "largest replicate difference", "stage", "endpoint", "counted from", "less"});
  return res;
}

std::optional<Step> read_step(Reader& r) {
  const std::string kind = r.choice("kind", step_kind_names());
  if (r.errors().failed())
    return std::nullopt;
  if (kind == "add reagent") {
    AddReagentStep s;
    s.reagent = r.text("reagent");
    s.volume_ml = r.quantity("volume", kVolume, 0.0, 1000.0, std::nullopt, true);
    r.finish({"kind", "reagent", "volume"});
    return s;
  }
  if (kind == "adjust ph") {
    AdjustPhStep s;
    s.target_ph = r.quantity("target", kNone, 0.0, 14.0, std::nullopt);
    s.tolerance_ph = r.quantity("tolerance", kNone, 0.0, 2.0, std::nullopt, true);
    s.acid = r.text("acid", "");
    s.base = r.text("base", "");
    s.largest_total_volume_ml =
        r.quantity("largest total volume", kVolume, 0.0, 1000.0, std::nullopt, true);
    if (s.acid.empty() && s.base.empty() && !r.errors().failed())
      r.missing("acid");  // one of acid or base is needed
    r.finish({"kind", "target", "tolerance", "acid", "base", "largest total volume"});
    return s;
  }
  if (kind == "wait") {
    WaitStep s;
    s.duration_s = r.quantity("duration", kTime, 0.0, 86400.0, std::nullopt, true);
    s.stirrer_rpm = r.quantity("stirrer speed", kSpeed, 0.0, 5000.0, 0.0);
    r.finish({"kind", "duration", "stirrer speed"});
    return s;
  }
  if (kind == "add titrant") {
    AddTitrantStep s;
    s.titrant = r.text("titrant");
    s.volume_ml = r.quantity("volume", kVolume, 0.0, 1000.0, std::nullopt, true);
    r.finish({"kind", "titrant", "volume"});
    return s;
  }
  if (kind == "titrate") {
    TitrateStep s = read_titration(r);
    r.finish(kTitrateKeys);
    return s;
  }
  if (kind == "back titrate") {
    BackTitrateStep s;
    static_cast<TitrateStep&>(s) = read_titration(r);
    r.finish(kTitrateKeys);
    return s;
  }
  if (kind == "evaluate") {
    EvaluateStep s;
    std::vector<std::string_view> methods(detection::method_names().begin(),
                                          detection::method_names().end());
    s.endpoint_method = r.choice("endpoint method", methods);
    s.options = r.json_object("options");
    if (!r.errors().failed()) {
      Result<void> checked;
      auto check = [&](auto parsed) {
        if (!parsed)
          checked = parsed.error();
      };
      if (s.endpoint_method == "derivative")
        check(detection::derivative_options_from_json(s.options));
      else if (s.endpoint_method == "segments")
        check(detection::segments_options_from_json(s.options));
      else if (s.endpoint_method == "crossing")
        check(detection::crossing_options_from_json(s.options));
      else if (s.endpoint_method == "gran")
        check(detection::gran_options_from_json(s.options));
      else if (s.endpoint_method == "model")
        check(detection::model_fit_options_from_json(s.options));
      if (!checked)
        r.errors().add(r.line_of("options"), "options", checked.error().message);
    }
    if (Entry* e = r.find("expected endpoint")) {
      const auto at = e->value.find(" to ");
      if (at == std::string::npos) {
        r.errors().add(e->line, "expected endpoint",
                       "must be a range such as '2 to 15 mL', not '" + e->value + "'");
      } else {
        // The unit follows the second number; the first may carry it too.
        std::string from_text = trim(e->value.substr(0, at));
        const std::string to_text = trim(e->value.substr(at + 4));
        const auto unit_at = to_text.find_first_not_of("0123456789.+-eE");
        const std::string unit = unit_at == std::string::npos ? "" : to_text.substr(unit_at);
        if (from_text.find_first_not_of("0123456789.+-eE") == std::string::npos)
          from_text += " " + unit;
        auto from = r.parse_quantity(from_text, e->line, "expected endpoint", kVolume);
        auto to = r.parse_quantity(to_text, e->line, "expected endpoint", kVolume);
        if (from && to) {
          s.expected_from_ml = *from;
          s.expected_to_ml = *to;
          if (*from < 0.0 || *to <= *from) {
            r.errors().add(e->line, "expected endpoint",
                           "the range must start at 0 mL or above and end above its start");
          }
        }
      }
    } else {
      r.missing("expected endpoint");
    }
    r.finish({"kind", "endpoint method", "options", "expected endpoint"});
    return s;
  }
  RinseStep s;
  s.liquid = r.text("liquid", "water");
  s.volume_ml = r.quantity("volume", kVolume, 0.0, 1000.0, 10.0, true);
  s.times = r.integer("times", 1, 10, 1);
  r.finish({"kind", "liquid", "volume", "times"});
  return s;
}

/// The titrant of a plain titrate step at a stage (1-based), or nothing if
/// the stage is a back-titration.
std::optional<std::string> direct_titrant(const Method& m, const std::vector<std::size_t>& stages,
                                          int stage) {
  const auto* t = std::get_if<TitrateStep>(&m.steps[stages[static_cast<std::size_t>(stage - 1)]]);
  return t ? std::optional<std::string>(t->titrant) : std::nullopt;
}

/// The endpoints a stage's titration passes (1-based stage).
int stage_endpoints(const Method& m, const std::vector<std::size_t>& stages, int stage) {
  const Step& step = m.steps[stages[static_cast<std::size_t>(stage - 1)]];
  if (const auto* t = std::get_if<TitrateStep>(&step))
    return t->endpoints;
  return std::get<BackTitrateStep>(step).endpoints;
}

/// The result rules against the stages: each names a stage that exists,
/// counts from a point that titrant of its own kind reaches, and subtracts
/// only an earlier result of the same titrant.
void check_results(const Method& m, const Lines& lines, Errors& errors) {
  const auto stages = titration_stages(m.steps);
  const int count = static_cast<int>(stages.size());
  const std::vector<ResultRule> results = result_rules(m);
  for (std::size_t i = 0; i < results.size(); ++i) {
    const ResultRule& r = results[i];
    auto at = [&](const std::string& key) { return lines.result_field(i, key); };
    for (std::size_t j = 0; j < i; ++j)
      if (results[j].analyte == r.analyte)
        errors.add(at("analyte"), "analyte",
                   "result '" + r.analyte + "' is already given at line " +
                       std::to_string(lines.result_field(j, "analyte")) +
                       " (each result needs its own analyte name)");
    if (r.stage > count) {
      errors.add(at("stage"), "stage",
                 "stage " + std::to_string(r.stage) + " does not exist: the method titrates in " +
                     std::to_string(count) + (count == 1 ? " stage" : " stages"));
      continue;
    }
    const int stage = r.stage == 0 ? count : r.stage;
    const auto titrant = direct_titrant(m, stages, stage);
    const int endpoints = stage_endpoints(m, stages, stage);
    if (endpoints > 1 && r.endpoint == 0) {
      errors.add(at("analyte"), "endpoint",
                 "stage " + std::to_string(stage) + " passes " + std::to_string(endpoints) +
                     " endpoints: say which one result '" + r.analyte +
                     "' reads (endpoint = 1 to " + std::to_string(endpoints) + ")");
      continue;
    }
    if (r.endpoint > endpoints) {
      errors.add(at("endpoint"), "endpoint",
                 "stage " + std::to_string(stage) + " passes " + std::to_string(endpoints) +
                     (endpoints == 1 ? " endpoint" : " endpoints") +
                     " (its titrate step's 'endpoints'), not " + std::to_string(r.endpoint));
      continue;
    }
    // A later endpoint of the same curve comes after an earlier one of its
    // own stage: counting from the previous endpoint stays in the stage.
    const bool later_in_curve = r.endpoint >= 2;
    if (r.counted_from != CountedFrom::stage_start) {
      const int first = r.counted_from == CountedFrom::previous_endpoint
                            ? (later_in_curve ? stage : stage - 1)
                            : 1;
      if (stage < 2 && !(later_in_curve && r.counted_from == CountedFrom::previous_endpoint)) {
        errors.add(at("counted from"), "counted from",
                   std::string("'") + counted_from_name(r.counted_from) +
                       "' needs a stage before this result's stage 1");
        continue;
      }
      for (int k = first; k <= stage; ++k) {
        const auto other = direct_titrant(m, stages, k);
        if (other && titrant && *other == *titrant)
          continue;
        const std::string why = !titrant ? "stage " + std::to_string(stage) + " is a back-titration"
                                : !other ? "stage " + std::to_string(k) + " is a back-titration"
                                         : "stage " + std::to_string(k) + " titrates with '" +
                                               *other + "', stage " + std::to_string(stage) +
                                               " with '" + *titrant + "'";
        errors.add(at("counted from"), "counted from",
                   std::string("'") + counted_from_name(r.counted_from) + "' needs stages " +
                       std::to_string(first) + " to " + std::to_string(stage) +
                       " to be titrate steps with one titrant (" + why + ")");
        break;
      }
    }
    if (!r.less.empty()) {
      std::optional<std::size_t> earlier;
      for (std::size_t j = 0; j < i; ++j)
        if (results[j].analyte == r.less)
          earlier = j;
      if (!earlier) {
        errors.add(at("less"), "less",
                   "'" + r.less + "' is not the analyte of a result given before this one");
        continue;
      }
      const int other_stage = results[*earlier].stage == 0 ? count : results[*earlier].stage;
      const auto other = direct_titrant(m, stages, other_stage);
      if (!titrant || !other || *other != *titrant)
        errors.add(at("less"), "less",
                   "result '" + r.less + "' (stage " + std::to_string(other_stage) +
                       ") and this one (stage " + std::to_string(stage) +
                       ") must both come from titrate steps with one titrant");
    }
  }
}

/// Checks between sections and the order of steps; `lines` locates errors.
void check_structure(const Method& m, const Lines& lines, Errors& errors) {
  auto titrant_known = [&](const std::string& name) {
    return std::any_of(m.titrants.begin(), m.titrants.end(),
                       [&](const TitrantUse& t) { return t.name == name; });
  };
  auto reagent_known = [&](const std::string& name) {
    return std::any_of(m.reagents.begin(), m.reagents.end(),
                       [&](const ReagentUse& r) { return r.name == name; });
  };
  for (std::size_t i = 0; i < m.titrants.size(); ++i) {
    for (std::size_t j = 0; j < i; ++j) {
      const int line = i < lines.titrant.size() ? lines.titrant[i] : lines.end;
      if (m.titrants[j].name == m.titrants[i].name)
        errors.add(line, "name", "titrant '" + m.titrants[i].name + "' is listed twice");
      else if (m.titrants[j].burette == m.titrants[i].burette)
        errors.add(line, "burette",
                   "burette '" + m.titrants[i].burette + "' already holds titrant '" +
                       m.titrants[j].name + "'");
    }
  }
  for (std::size_t i = 0; i < m.reagents.size(); ++i) {
    for (std::size_t j = 0; j < i; ++j) {
      if (m.reagents[j].name == m.reagents[i].name) {
        const int line = i < lines.reagent.size() ? lines.reagent[i] : lines.end;
        errors.add(line, "name", "reagent '" + m.reagents[i].name + "' is listed twice");
      }
    }
  }

  // Step indices, kNoStep if none (std::optional<size_t> trips GCC 12's
  // maybe-uninitialized warning here).
  constexpr std::size_t kNoStep = static_cast<std::size_t>(-1);
  std::size_t unevaluated = kNoStep;  // a titration waiting for its evaluate step
  std::size_t excess = kNoStep;       // an add titrant step not yet titrated back
  std::string excess_titrant;
  double largest_volume_ml = 0.0;
  bool any_titration = false;
  for (std::size_t i = 0; i < m.steps.size(); ++i) {
    const Step& step = m.steps[i];
    auto at = [&](const std::string& key) { return lines.field(i, key); };
    if (const auto* s = std::get_if<AddReagentStep>(&step)) {
      if (!reagent_known(s->reagent))
        errors.add(at("reagent"), "reagent",
                   "reagent '" + s->reagent + "' is not listed in a [reagent] section");
    } else if (const auto* s = std::get_if<AdjustPhStep>(&step)) {
      if (!s->acid.empty() && !reagent_known(s->acid))
        errors.add(at("acid"), "acid",
                   "reagent '" + s->acid + "' is not listed in a [reagent] section");
      if (!s->base.empty() && !reagent_known(s->base))
        errors.add(at("base"), "base",
                   "reagent '" + s->base + "' is not listed in a [reagent] section");
    } else if (const auto* s = std::get_if<AddTitrantStep>(&step)) {
      if (!titrant_known(s->titrant))
        errors.add(at("titrant"), "titrant",
                   "titrant '" + s->titrant + "' is not listed in a [titrant] section");
      if (excess != kNoStep)
        errors.add(at("kind"), "kind",
                   "an excess was already added at line " +
                       std::to_string(lines.field(excess, "kind")) +
                       " and is not yet titrated back");
      excess = i;
      excess_titrant = s->titrant;
    } else if (const auto* s = std::get_if<TitrateStep>(&step)) {
      // BackTitrateStep is its own alternative of Step, so this is a plain titration.
      if (!titrant_known(s->titrant))
        errors.add(at("titrant"), "titrant",
                   "titrant '" + s->titrant + "' is not listed in a [titrant] section");
      if (unevaluated != kNoStep)
        errors.add(at("kind"), "kind",
                   "the titration at line " + std::to_string(lines.field(unevaluated, "kind")) +
                       " is not evaluated before this one");
      if (excess != kNoStep)
        errors.add(at("kind"), "kind",
                   "the excess added at line " + std::to_string(lines.field(excess, "kind")) +
                       " must be titrated back (kind = back titrate) before another titration");
      if (s->endpoints > 1 &&
          (s->dosing == "approach preset signal" || s->dosing == "model guided"))
        errors.add(at("endpoints"), "endpoints",
                   "dosing '" + s->dosing + "' ends the titration at its first endpoint; " +
                       std::to_string(s->endpoints) +
                       " endpoints need fixed or adaptive increments");
      unevaluated = i;
      largest_volume_ml = s->largest_volume_ml;
      any_titration = true;
    } else if (const auto* s = std::get_if<BackTitrateStep>(&step)) {
      if (!titrant_known(s->titrant))
        errors.add(at("titrant"), "titrant",
                   "titrant '" + s->titrant + "' is not listed in a [titrant] section");
      if (unevaluated != kNoStep)
        errors.add(at("kind"), "kind",
                   "the titration at line " + std::to_string(lines.field(unevaluated, "kind")) +
                       " is not evaluated before this one");
      if (excess == kNoStep) {
        errors.add(at("kind"), "kind",
                   "a back titration needs an excess added before it (kind = add titrant)");
      } else if (excess_titrant == s->titrant) {
        errors.add(at("titrant"), "titrant",
                   "a back titration needs another titrant than the excess ('" + s->titrant + "')");
      }
      if (s->endpoints != 1)
        errors.add(
            at("endpoints"), "endpoints",
            "a back titration has one endpoint, the excess's, not " + std::to_string(s->endpoints));
      excess = kNoStep;
      unevaluated = i;
      largest_volume_ml = s->largest_volume_ml;
      any_titration = true;
    } else if (const auto* s = std::get_if<EvaluateStep>(&step)) {
      if (unevaluated == kNoStep) {
        errors.add(at("kind"), "kind",
                   any_titration ? "evaluate follows no titration of its own (the titration "
                                   "before is already evaluated)"
                                 : "evaluate comes before any titration");
      } else if (s->expected_to_ml > largest_volume_ml) {
        errors.add(at("expected endpoint"), "expected endpoint",
                   "the range ends at " + number(s->expected_to_ml) +
                       " mL, beyond the titration's largest volume (" + number(largest_volume_ml) +
                       " mL)");
      }
      unevaluated = kNoStep;
    }
  }
  if (!any_titration)
    errors.add(lines.end, "kind", "the method has no titrate step");
  if (unevaluated != kNoStep)
    errors.add(lines.field(unevaluated, "kind"), "kind",
               "this titration is never evaluated (add an evaluate step after it)");
  if (excess != kNoStep)
    errors.add(lines.field(excess, "kind"), "kind",
               "the excess added here is never titrated back (add a back titrate step)");
  if (any_titration)
    check_results(m, lines, errors);
}

}  // namespace

Result<Method> parse_method(std::string_view text, const std::string& origin) {
  Errors errors(origin);
  static const std::vector<std::string_view> kSections = {"method",     "titrant", "reagent",
                                                          "indication", "result",  "step"};
  int line_no = 0;
  std::vector<Section> sections = split_sections(text, kSections, errors, &line_no);
  if (errors.failed())
    return errors.error();

  Method m;
  Lines lines;
  lines.end = line_no;
  bool have_method = false;
  bool have_indication = false;
  bool have_result = false;
  for (auto& section : sections) {
    auto once = [&](bool& seen) {
      if (seen)
        errors.add(section.line, section.name,
                   "the [" + section.name + "] section may appear only once");
      seen = true;
    };
    if (section.name == "method") {
      once(have_method);
      Reader r(section, errors, "[method] section");
      m.name = r.text("name");
      m.version = r.integer("version", 1, 1000000, 1);
      m.description = r.text("description", "");
      m.replicates = r.integer("replicates", 1, 20, 1);
      r.finish({"name", "version", "description", "replicates"});
    } else if (section.name == "titrant") {
      Reader r(section, errors, "[titrant] section");
      TitrantUse t;
      t.name = r.text("name");
      t.burette = r.text("burette");
      r.finish({"name", "burette"});
      m.titrants.push_back(t);
      lines.titrant.push_back(section.line);
    } else if (section.name == "reagent") {
      Reader r(section, errors, "[reagent] section");
      ReagentUse t;
      t.name = r.text("name");
      t.doser = r.text("doser");
      r.finish({"name", "doser"});
      m.reagents.push_back(t);
      lines.reagent.push_back(section.line);
    } else if (section.name == "indication") {
      once(have_indication);
      Reader r(section, errors, "[indication] section");
      const std::string kind = r.choice("kind", {"electrode", "photometer"});
      m.indication.kind =
          kind == "photometer" ? IndicationKind::photometer : IndicationKind::electrode;
      m.indication.name = r.text("name");
      m.indication.needs_calibration = r.yes_no("needs calibration", true);
      r.finish({"kind", "name", "needs calibration"});
    } else if (section.name == "result") {
      Reader r(section, errors, "[result] section");
      (have_result ? m.more_results.emplace_back() : m.result) = read_result(r);
      have_result = true;
      lines.results.add(section);
    } else {
      Reader r(section, errors, "step");
      auto step = read_step(r);
      if (step) {
        m.steps.push_back(std::move(*step));
        lines.steps.add(section);
      }
    }
    if (errors.failed())
      return errors.error();
  }
  if (!have_method)
    errors.add(lines.end, "method", "the file has no [method] section");
  if (!have_indication)
    errors.add(lines.end, "indication", "the file has no [indication] section");
  if (!have_result)
    errors.add(lines.end, "result", "the file has no [result] section");
  if (m.titrants.empty())
    errors.add(lines.end, "titrant", "the file has no [titrant] section");
  if (errors.failed())
    return errors.error();
  check_structure(m, lines, errors);
  if (errors.failed())
    return errors.error();
  return m;
}

std::string write_method(const Method& m) {
  std::ostringstream out;
  auto put = [&](const char* key, const std::string& value) {
    out << key << " = " << value << "\n";
  };
  out << "# veq method file (docs/methods.md)\n";
  out << "[method]\n";
  put("name", one_line(m.name));
  put("version", std::to_string(m.version));
  put("description", one_line(m.description));
  put("replicates", std::to_string(m.replicates));
  for (const auto& t : m.titrants) {
    out << "\n[titrant]\n";
    put("name", one_line(t.name));
    put("burette", one_line(t.burette));
  }
  for (const auto& r : m.reagents) {
    out << "\n[reagent]\n";
    put("name", one_line(r.name));
    put("doser", one_line(r.doser));
  }
  out << "\n[indication]\n";
  put("kind", indication_kind_name(m.indication.kind));
  put("name", one_line(m.indication.name));
  put("needs calibration", m.indication.needs_calibration ? "yes" : "no");
  const std::vector<ResultRule> results = result_rules(m);
  for (const ResultRule& res : results) {
    out << "\n[result]\n";
    put("analyte", one_line(res.analyte));
    put("molar mass", number(res.molar_mass_g_per_mol) + " g/mol");
    put("analyte per titrant", number(res.analyte_per_titrant));
    put("unit", res.unit);
    if (res.lowest)
      put("lowest", number(*res.lowest) + " " + res.unit);
    if (res.highest)
      put("highest", number(*res.highest) + " " + res.unit);
    if (res.largest_replicate_difference) {
      put("largest replicate difference",
          number(*res.largest_replicate_difference) + " " +
              (res.replicate_difference_relative ? std::string("%") : res.unit));
    }
    // A method with one result from its last stage is written as it always
    // was; stages are named once there is more to say.
    if (res.stage != 0)
      put("stage", std::to_string(res.stage));
    if (res.endpoint != 0)
      put("endpoint", std::to_string(res.endpoint));
    if (res.counted_from != CountedFrom::stage_start || results.size() > 1)
      put("counted from", counted_from_name(res.counted_from));
    if (!res.less.empty())
      put("less", one_line(res.less));
  }
  const std::string drift_unit =
      m.indication.kind == IndicationKind::electrode ? " mV/min" : " per min";
  for (const Step& step : m.steps) {
    out << "\n[step]\n";
    put("kind", step_kind_name(step));
    if (const auto* s = std::get_if<AddReagentStep>(&step)) {
      put("reagent", one_line(s->reagent));
      put("volume", number(s->volume_ml) + " mL");
    } else if (const auto* s = std::get_if<AdjustPhStep>(&step)) {
      put("target", number(s->target_ph));
      put("tolerance", number(s->tolerance_ph));
      if (!s->acid.empty())
        put("acid", one_line(s->acid));
      if (!s->base.empty())
        put("base", one_line(s->base));
      put("largest total volume", number(s->largest_total_volume_ml) + " mL");
    } else if (const auto* s = std::get_if<WaitStep>(&step)) {
      put("duration", number(s->duration_s) + " s");
      put("stirrer speed", number(s->stirrer_rpm) + " rpm");
    } else if (const auto* s = std::get_if<AddTitrantStep>(&step)) {
      put("titrant", one_line(s->titrant));
      put("volume", number(s->volume_ml) + " mL");
    } else if (std::holds_alternative<TitrateStep>(step) ||
               std::holds_alternative<BackTitrateStep>(step)) {
      const TitrateStep& t = std::holds_alternative<TitrateStep>(step)
                                 ? std::get<TitrateStep>(step)
                                 : static_cast<const TitrateStep&>(std::get<BackTitrateStep>(step));
      put("titrant", one_line(t.titrant));
      put("dosing", t.dosing);
      put("dosing options", t.dosing_options.dump());
      put("initial volume", number(t.initial_volume_ml) + " mL");
      put("largest volume", number(t.largest_volume_ml) + " mL");
      put("volume past endpoint", number(t.volume_past_endpoint_ml) + " mL");
      if (t.endpoints != 1)
        put("endpoints", std::to_string(t.endpoints));
      put("time limit", number(t.time_limit_s) + " s");
      put("drift limit", number(t.drift_limit_per_min) + drift_unit);
      put("settling window", number(t.settling_window_s) + " s");
      put("shortest wait", number(t.shortest_wait_s) + " s");
      put("longest wait", number(t.longest_wait_s) + " s");
    } else if (const auto* s = std::get_if<EvaluateStep>(&step)) {
      put("endpoint method", s->endpoint_method);
      put("options", s->options.dump());
      put("expected endpoint",
          number(s->expected_from_ml) + " to " + number(s->expected_to_ml) + " mL");
    } else if (const auto* s = std::get_if<RinseStep>(&step)) {
      put("liquid", one_line(s->liquid));
      put("volume", number(s->volume_ml) + " mL");
      put("times", std::to_string(s->times));
    }
  }
  return out.str();
}

Result<void> validate_method(const Method& method) {
  auto parsed = parse_method(write_method(method), "method '" + method.name + "' as written");
  if (!parsed)
    return parsed.error();
  return {};
}

Result<Method> read_method_file(const std::string& path) {
  std::ifstream in(path, std::ios::binary);
  if (!in)
    return make_error(ErrorKind::not_found, "cannot open method file '" + path + "'");
  std::ostringstream text;
  text << in.rdbuf();
  return parse_method(text.str(), path);
}

}  // namespace veq::method
