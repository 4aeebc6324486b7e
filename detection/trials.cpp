#include "detection/trials.hpp"

#include <algorithm>
#include <array>
#include <cmath>
#include <cstdio>
#include <random>
#include <sstream>
#include <tuple>

#include "chemistry/prediction.hpp"
#include "detection/evaluate.hpp"
#include "detection/fit_support.hpp"

namespace veq::detection {

namespace {

veq::Error trials_invalid(std::string message) {
  return veq::make_error(veq::ErrorKind::invalid_input, std::move(message));
}

// The built-in scenarios: invented samples in the concentration ranges of
// routine EDTA titrations, 50 mL of sample, equivalence near 10 mL.
chemistry::SampleComposition calcium_sample(double ph) {
  chemistry::SampleComposition s;
  s.sample_volume_ml = 50.0;
  s.metals = {{"Ca", 0.01}};
  s.ph = ph;
  s.titrant.conc_mol_per_l = 0.05;
  s.signal.kind = chemistry::SignalKind::potential;
  return s;
}

chemistry::SampleComposition ammonia_sample(const char* metal) {
  chemistry::SampleComposition s;
  s.sample_volume_ml = 50.0;
  s.metals = {{metal, 0.002}};
  s.ph = 10.0;
  s.ligands = {{"ammonia", 0.1, 0.0}};
  s.titrant.conc_mol_per_l = 0.01;
  s.signal.kind = chemistry::SignalKind::potential;
  return s;
}

TrialScenario make_scenario(std::string_view name) {
  TrialScenario t;
  t.name = std::string(name);
  t.step_ml = 0.1;
  t.noise = 0.1;
  if (name == "strong_break") {
    t.description =
        "calcium 0.01 mol/L at pH 10 with 0.05 mol/L EDTA (log K' 10.1), calcium electrode, "
        "0.1 mL steps shrinking to 0.05 mL near the endpoint, 0.1 mV noise";
    t.sample = calcium_sample(10.0);
    t.fine_step_ml = 0.05;
  } else if (name == "strong_break_spikes") {
    t.description = "strong_break with three readings 20 mV off";
    t.sample = calcium_sample(10.0);
    t.fine_step_ml = 0.05;
    t.spikes = 3;
    t.spike_size = 20.0;
  } else if (name == "ammonia_copper" || name == "ammonia_zinc") {
    const bool copper = name == "ammonia_copper";
    t.description = std::string(copper ? "copper" : "zinc") +
                    " 0.002 mol/L in 0.1 mol/L ammonia at pH 10 with 0.01 mol/L EDTA, " +
                    (copper ? "copper" : "zinc") +
                    " electrode, 0.1 mV noise; the ammonia holds most of the metal and lets go "
                    "of it as the titrant dilutes the sample";
    t.sample = ammonia_sample(copper ? "Cu" : "Zn");
  } else if (name == "weak_log_k_7" || name == "weak_log_k_6" || name == "weak_log_k_5_5") {
    // Calcium at the pH where its conditional constant with EDTA (library
    // constants) falls to 10^7, 10^6 or 10^5.5; 0.002 mol/L so that
    // log10(C K') at the equivalence point is 4.2, 3.2 and 2.7, below the
    // common-practice criterion of 6 for a sharp endpoint.
    const double ph = name == "weak_log_k_7" ? 6.8 : name == "weak_log_k_6" ? 6.05 : 5.75;
    const char* text = name == "weak_log_k_7"   ? "6.8 (conditional log K' 7.0)"
                       : name == "weak_log_k_6" ? "6.05 (conditional log K' 6.0)"
                                                : "5.75 (conditional log K' 5.5)";
    t.description = std::string("calcium 0.002 mol/L at pH ") + text +
                    " with 0.01 mol/L EDTA, calcium electrode, 0.1 mV noise: a weak break";
    t.sample = calcium_sample(ph);
    t.sample.metals[0].conc_mol_per_l = 0.002;
    t.sample.titrant.conc_mol_per_l = 0.01;
  } else if (name == "two_metals") {
    t.description =
        "calcium and magnesium 0.005 mol/L each at pH 10 in 0.1 mol/L ammonia with 0.05 mol/L "
        "EDTA, calcium electrode: calcium (log K' 10.1) is bound first, magnesium (8.3) next";
    t.sample = calcium_sample(10.0);
    t.sample.metals = {{"Ca", 0.005}, {"Mg", 0.005}};
    t.sample.ligands = {{"ammonia", 0.1, 0.0}};
    t.sample.signal.metal = "Ca";
  } else if (name == "slow_electrode") {
    t.description =
        "strong_break read by a slow electrode: response time 8 s, each reading 10 s after its "
        "dose, drift 0.3 mV/min";
    t.sample = calcium_sample(10.0);
    t.lag_s = 8.0;
    t.reading_interval_s = 10.0;
    t.drift_mv_per_min = 0.3;
  } else if (name == "indicator") {
    t.description =
        "magnesium 0.002 mol/L at pH 10 in 0.1 mol/L ammonia with 5e-5 mol/L Eriochrome Black T, "
        "0.01 mol/L EDTA, absorbance at 620 nm (1 cm), noise 0.002";
    t.sample.sample_volume_ml = 50.0;
    t.sample.metals = {{"Mg", 0.002}};
    t.sample.ph = 10.0;
    t.sample.ligands = {{"ammonia", 0.1, 0.0}};
    t.sample.titrant.conc_mol_per_l = 0.01;
    t.sample.indicator = chemistry::IndicatorSpec{"Eriochrome Black T", 5e-5};
    t.sample.signal.kind = chemistry::SignalKind::absorbance;
    t.sample.signal.wavelength_nm = 620.0;
    t.noise = 0.002;
  }
  return t;
}

constexpr std::array<std::string_view, 10> kScenarioNames = {
    "strong_break", "strong_break_spikes", "ammonia_copper", "ammonia_zinc",   "weak_log_k_7",
    "weak_log_k_6", "weak_log_k_5_5",      "two_metals",     "slow_electrode", "indicator"};

SignalKind curve_kind(chemistry::SignalKind kind) {
  switch (kind) {
    case chemistry::SignalKind::p_metal:
      return SignalKind::p_metal;
    case chemistry::SignalKind::potential:
      return SignalKind::potential_mv;
    case chemistry::SignalKind::absorbance:
      return SignalKind::absorbance;
  }
  return SignalKind::potential_mv;
}

}  // namespace

std::span<const std::string_view> trial_scenario_names() noexcept {
  return kScenarioNames;
}

veq::Result<TrialScenario> builtin_trial_scenario(std::string_view name) {
  for (std::string_view known : kScenarioNames) {
    if (known == name)
      return make_scenario(name);
  }
  std::string list;
  for (std::string_view known : kScenarioNames)
    list += (list.empty() ? "" : ", ") + std::string(known);
  return trials_invalid("unknown trial scenario '" + std::string(name) + "'; known: " + list);
}

nlohmann::json to_json(const TrialScenario& t) {
  return {{"name", t.name},
          {"description", t.description},
          {"sample", chemistry::to_json(t.sample)},
          {"amount_spread_percent", t.amount_spread_percent},
          {"constant_spread_log10", t.constant_spread_log10},
          {"step_ml", t.step_ml},
          {"fine_step_ml", t.fine_step_ml},
          {"fine_zone_ml", t.fine_zone_ml},
          {"end_volume_ml", t.end_volume_ml},
          {"noise", t.noise},
          {"electrode_zero_mv", t.electrode_zero_mv},
          {"electrode_zero_spread_mv", t.electrode_zero_spread_mv},
          {"slope_percent", t.slope_percent},
          {"slope_spread_percent", t.slope_spread_percent},
          {"lag_s", t.lag_s},
          {"drift_mv_per_min", t.drift_mv_per_min},
          {"reading_interval_s", t.reading_interval_s},
          {"dose_rate_ml_per_min", t.dose_rate_ml_per_min},
          {"spikes", t.spikes},
          {"spike_size", t.spike_size}};
}

veq::Result<TrialScenario> trial_scenario_from_json(const nlohmann::json& json) {
  if (!json.is_object())
    return trials_invalid("a trial scenario must be a JSON object");
  TrialScenario t;
  if (json.contains("name") && json["name"].is_string()) {
    // Start from the built-in scenario of that name, if there is one.
    auto builtin = builtin_trial_scenario(json["name"].get<std::string>());
    if (builtin)
      t = *builtin;
    t.name = json["name"].get<std::string>();
  }
  for (const auto& item : json.items()) {
    // Named references, not a structured binding: clang 14 (the fuzzing
    // build) cannot capture bindings in the lambdas below.
    const std::string& key = item.key();
    const nlohmann::json& value = item.value();
    auto number = [&](double& field) -> std::optional<veq::Error> {
      if (!value.is_number() || !std::isfinite(value.get<double>()))
        return trials_invalid("trial scenario field '" + key + "' must be a number");
      field = value.get<double>();
      return std::nullopt;
    };
    std::optional<veq::Error> error;
    if (key == "name") {
      if (!value.is_string())
        error = trials_invalid("trial scenario field 'name' must be a string");
    } else if (key == "description") {
      if (!value.is_string())
        error = trials_invalid("trial scenario field 'description' must be a string");
      else
        t.description = value.get<std::string>();
    } else if (key == "sample") {
      auto sample = chemistry::parse_sample_json(value.dump());
      if (!sample)
        error = trials_invalid("trial scenario field 'sample': " + sample.error().message);
      else
        t.sample = std::move(*sample);
    } else if (key == "spikes") {
      if (!value.is_number_integer() || value.get<int>() < 0)
        error = trials_invalid("trial scenario field 'spikes' must be a whole number >= 0");
      else
        t.spikes = value.get<int>();
    } else if (key == "amount_spread_percent") {
      error = number(t.amount_spread_percent);
    } else if (key == "constant_spread_log10") {
      error = number(t.constant_spread_log10);
    } else if (key == "step_ml") {
      error = number(t.step_ml);
    } else if (key == "fine_step_ml") {
      error = number(t.fine_step_ml);
    } else if (key == "fine_zone_ml") {
      error = number(t.fine_zone_ml);
    } else if (key == "end_volume_ml") {
      error = number(t.end_volume_ml);
    } else if (key == "noise") {
      error = number(t.noise);
    } else if (key == "electrode_zero_mv") {
      error = number(t.electrode_zero_mv);
    } else if (key == "electrode_zero_spread_mv") {
      error = number(t.electrode_zero_spread_mv);
    } else if (key == "slope_percent") {
      error = number(t.slope_percent);
    } else if (key == "slope_spread_percent") {
      error = number(t.slope_spread_percent);
    } else if (key == "lag_s") {
      error = number(t.lag_s);
    } else if (key == "drift_mv_per_min") {
      error = number(t.drift_mv_per_min);
    } else if (key == "reading_interval_s") {
      error = number(t.reading_interval_s);
    } else if (key == "dose_rate_ml_per_min") {
      error = number(t.dose_rate_ml_per_min);
    } else if (key == "spike_size") {
      error = number(t.spike_size);
    } else {
      error = trials_invalid("unknown trial scenario field '" + key + "'");
    }
    if (error)
      return *error;
  }
  if (!(t.step_ml > 0.0) || t.fine_step_ml < 0.0 || t.noise < 0.0 || t.lag_s < 0.0 ||
      t.reading_interval_s < 0.0 || !(t.dose_rate_ml_per_min > 0.0) ||
      t.amount_spread_percent < 0.0 || t.amount_spread_percent >= 100.0 || t.end_volume_ml < 0.0) {
    return trials_invalid(
        "trial scenario: step_ml and dose_rate_ml_per_min must be > 0; fine_step_ml, noise, "
        "lag_s, reading_interval_s, end_volume_ml >= 0; amount_spread_percent in [0, 100)");
  }
  if (t.sample.metals.empty())
    return trials_invalid("trial scenario: the sample has no metal");
  return t;
}

veq::Result<TrialCurve> simulate_trial_curve(const TrialScenario& scenario, std::uint64_t seed,
                                             const chemistry::ConstantsLibrary& library) {
  std::mt19937_64 rng(seed);
  auto uniform = [&](double half_width) {
    return half_width > 0.0 ? std::uniform_real_distribution<double>(-half_width, half_width)(rng)
                            : 0.0;
  };
  const chemistry::SampleComposition& nominal = scenario.sample;
  if (nominal.metals.empty() || !(nominal.titrant.conc_mol_per_l > 0.0) ||
      !(nominal.sample_volume_ml > 0.0)) {
    return trials_invalid(
        "trial scenario '" + scenario.name +
        "': the sample needs a metal, a titrant concentration and a sample volume");
  }
  // The truth: amounts, constants and electrode differ from the nominal.
  chemistry::SampleComposition truth = nominal;
  chemistry::ConstantsLibrary true_library = library;
  chemistry::LigandEntry* titrant = nullptr;
  for (auto& l : true_library.ligands) {
    if (l.name == nominal.titrant.name)
      titrant = &l;
  }
  if (!titrant)
    return trials_invalid("titrant '" + nominal.titrant.name + "' is not in the constants library");
  for (auto& metal : truth.metals) {
    metal.conc_mol_per_l *= 1.0 + uniform(scenario.amount_spread_percent) / 100.0;
    const double shift = uniform(scenario.constant_spread_log10);
    for (auto& c : titrant->complexes) {
      if (c.metal == metal.name)
        c.value.log10_beta += shift;
    }
  }
  truth.signal.standard_potential_mv =
      scenario.electrode_zero_mv + uniform(scenario.electrode_zero_spread_mv);
  truth.signal.slope_percent = scenario.slope_percent + uniform(scenario.slope_spread_percent);
  auto model = chemistry::TitrationModel::create(true_library, truth);
  if (!model)
    return model.error();
  auto order = fit_support::titration_order(truth, true_library);
  if (!order)
    return order.error();
  auto nominal_order = fit_support::titration_order(nominal, library);
  if (!nominal_order)
    return nominal_order.error();

  std::vector<double> equivalence_ml;
  double cumulative = 0.0;
  for (std::size_t m : *order) {
    cumulative += model->metal_volume_ml(m);
    equivalence_ml.push_back(cumulative);
  }
  std::vector<double> nominal_ml;
  cumulative = 0.0;
  for (std::size_t m : *nominal_order) {
    cumulative += nominal.metals[m].conc_mol_per_l * nominal.sample_volume_ml /
                  nominal.titrant.conc_mol_per_l;
    nominal_ml.push_back(cumulative);
  }
  const double end_ml =
      scenario.end_volume_ml > 0.0 ? scenario.end_volume_ml : 1.3 * nominal_ml.back();

  // Dosing plan.
  std::vector<double> volumes{0.0};
  while (volumes.back() < end_ml - 1e-9) {
    double step = scenario.step_ml;
    if (scenario.fine_step_ml > 0.0) {
      for (double at : nominal_ml) {
        const double distance = std::abs(volumes.back() - at);
        if (distance < scenario.fine_zone_ml) {
          step = std::min(step, scenario.fine_step_ml + (scenario.step_ml - scenario.fine_step_ml) *
                                                            distance / scenario.fine_zone_ml);
        }
      }
    }
    volumes.push_back(std::min(volumes.back() + step, end_ml));
  }

  chemistry::Speciation work, previous;
  bool have = false;
  auto equilibrium = [&](double v) -> veq::Result<double> {
    auto solved = model->solve_at(v, work, have ? &previous : nullptr);
    if (!solved)
      return solved.error();
    std::swap(work, previous);
    have = true;
    return model->signal(previous);
  };

  CurveColumns columns;
  columns.kind = curve_kind(nominal.signal.kind);
  columns.sample_volume_ml = nominal.sample_volume_ml;
  const bool timed = scenario.reading_interval_s > 0.0;
  const bool electrode = nominal.signal.kind == chemistry::SignalKind::potential;
  std::normal_distribution<double> noise(0.0, 1.0);
  double time_s = 0.0;
  double reading = 0.0;  // the electrode's (lagged) value
  for (std::size_t i = 0; i < volumes.size(); ++i) {
    if (i == 0 || !timed || scenario.lag_s <= 0.0) {
      if (timed && i > 0) {
        time_s += (volumes[i] - volumes[i - 1]) / scenario.dose_rate_ml_per_min * 60.0 +
                  scenario.reading_interval_s;
      }
      auto e = equilibrium(volumes[i]);
      if (!e)
        return e.error();
      reading = *e;
    } else {
      // The dose runs at a steady rate, the electrode follows first order
      // (exact exponential steps towards the value at each sub-step's
      // middle), then it settles towards the new value until the reading.
      constexpr int kSubsteps = 4;
      const double dose_s = (volumes[i] - volumes[i - 1]) / scenario.dose_rate_ml_per_min * 60.0;
      for (int k = 0; k < kSubsteps; ++k) {
        const double v = volumes[i - 1] + (volumes[i] - volumes[i - 1]) * (k + 0.5) / kSubsteps;
        auto e = equilibrium(v);
        if (!e)
          return e.error();
        reading = *e + (reading - *e) * std::exp(-dose_s / kSubsteps / scenario.lag_s);
      }
      auto e = equilibrium(volumes[i]);
      if (!e)
        return e.error();
      reading = *e + (reading - *e) * std::exp(-scenario.reading_interval_s / scenario.lag_s);
      time_s += dose_s + scenario.reading_interval_s;
    }
    double value = reading;
    if (timed && electrode)
      value += scenario.drift_mv_per_min * time_s / 60.0;
    if (scenario.noise > 0.0)
      value += scenario.noise * noise(rng);
    columns.volume_ml.push_back(volumes[i]);
    columns.signal.push_back(value);
    if (timed)
      columns.time_s.push_back(time_s);
  }
  // Spikes on readings away from the ends.
  const std::size_t n = columns.signal.size();
  for (int s = 0; s < scenario.spikes && n > 4; ++s) {
    const auto at = std::uniform_int_distribution<std::size_t>(2, n - 3)(rng);
    columns.signal[at] += (rng() & 1u) ? scenario.spike_size : -scenario.spike_size;
  }
  auto curve = Curve::from_columns(std::move(columns));
  if (!curve)
    return curve.error();
  return TrialCurve{std::move(*curve), std::move(equivalence_ml), seed};
}

veq::Result<TrialMethod> parse_trial_method(std::string_view text) {
  TrialMethod m;
  const auto colon = text.find(':');
  m.method = std::string(text.substr(0, colon));
  m.label = std::string(text);
  const auto known = method_names();
  if (std::find(known.begin(), known.end(), m.method) == known.end()) {
    std::string list;
    for (std::string_view k : known)
      list += (list.empty() ? "" : ", ") + std::string(k);
    return trials_invalid("unknown endpoint method '" + m.method + "' in '" + std::string(text) +
                          "'; known: " + list);
  }
  if (colon == std::string_view::npos)
    return m;
  std::string_view rest = text.substr(colon + 1);
  while (!rest.empty()) {
    const auto comma = rest.find(',');
    const std::string_view item = rest.substr(0, comma);
    const auto eq = item.find('=');
    if (eq == std::string_view::npos || eq == 0) {
      return trials_invalid("expected NAME=VALUE after the method name, got '" + std::string(item) +
                            "' in '" + std::string(text) + "'");
    }
    const std::string value(item.substr(eq + 1));
    nlohmann::json parsed = nlohmann::json::parse(value, nullptr, false);
    m.options[std::string(item.substr(0, eq))] =
        parsed.is_discarded() ? nlohmann::json(value) : parsed;
    if (comma == std::string_view::npos)
      break;
    rest = rest.substr(comma + 1);
  }
  return m;
}

std::vector<TrialOutcome> run_trials(std::span<const TrialCurve> curves, const TrialMethod& method,
                                     const chemistry::SampleComposition& nominal_sample,
                                     const chemistry::ConstantsLibrary& library) {
  nlohmann::json options = method.options.is_null() ? nlohmann::json::object() : method.options;
  if ((method.method == "gran" || method.method == "model") && !options.contains("sample"))
    options["sample"] = chemistry::to_json(nominal_sample);
  std::vector<TrialOutcome> outcomes;
  outcomes.reserve(curves.size());
  for (const TrialCurve& c : curves) {
    TrialOutcome o;
    o.seed = c.seed;
    o.equivalence_ml = c.equivalence_ml;
    auto ev = evaluate(c.curve, method.method, options, library);
    if (!ev) {
      o.error = ev.error().message;
    } else {
      for (const Endpoint& e : ev->endpoints) {
        o.endpoint_ml.push_back(e.volume_ml);
        o.uncertainty_ml.push_back(e.uncertainty_ml);
      }
      o.flags = ev->flags;
    }
    outcomes.push_back(std::move(o));
  }
  return outcomes;
}

std::vector<std::ptrdiff_t> match_endpoints(const TrialOutcome& o) {
  const std::size_t truths = o.equivalence_ml.size(), found = o.endpoint_ml.size();
  std::vector<std::ptrdiff_t> match(truths, -1);
  if (found == truths) {
    for (std::size_t k = 0; k < truths; ++k)
      match[k] = static_cast<std::ptrdiff_t>(k);
    return match;
  }
  // Closest pairs first, each endpoint and each truth used once.
  std::vector<std::tuple<double, std::size_t, std::size_t>> pairs;
  for (std::size_t k = 0; k < truths; ++k) {
    for (std::size_t j = 0; j < found; ++j)
      pairs.emplace_back(std::abs(o.endpoint_ml[j] - o.equivalence_ml[k]), k, j);
  }
  std::sort(pairs.begin(), pairs.end());
  std::vector<bool> used(found, false);
  for (const auto& [distance, k, j] : pairs) {
    if (match[k] < 0 && !used[j]) {
      match[k] = static_cast<std::ptrdiff_t>(j);
      used[j] = true;
    }
  }
  return match;
}

std::vector<TrialSummary> summarise_trials(const std::string& label,
                                           std::span<const TrialOutcome> outcomes) {
  std::size_t points = 0;
  for (const auto& o : outcomes)
    points = std::max(points, o.equivalence_ml.size());
  std::vector<TrialSummary> out;
  for (std::size_t k = 0; k < points; ++k) {
    TrialSummary s;
    s.label = label;
    s.endpoint_index = k;
    s.curves = outcomes.size();
    std::vector<double> errors;
    double u_sum = 0.0;
    std::size_t covered = 0;
    for (const auto& o : outcomes) {
      if (!o.error.empty()) {
        ++s.failed;
        continue;
      }
      if (k >= o.equivalence_ml.size())
        continue;
      const auto j = match_endpoints(o)[k];
      if (j < 0)
        continue;
      const auto ju = static_cast<std::size_t>(j);
      const double truth = o.equivalence_ml[k];
      const double error = o.endpoint_ml[ju] - truth;
      errors.push_back(100.0 * error / truth);
      u_sum += 100.0 * o.uncertainty_ml[ju] / truth;
      if (std::abs(error) <= 2.0 * o.uncertainty_ml[ju])
        ++covered;
    }
    s.found = errors.size();
    if (!errors.empty()) {
      double sum = 0.0, squares = 0.0;
      for (double e : errors) {
        sum += e;
        squares += e * e;
        s.max_abs_percent = std::max(s.max_abs_percent, std::abs(e));
      }
      const auto count = static_cast<double>(errors.size());
      s.bias_percent = sum / count;
      s.rms_percent = std::sqrt(squares / count);
      double spread = 0.0;
      for (double e : errors)
        spread += (e - s.bias_percent) * (e - s.bias_percent);
      s.sd_percent = errors.size() > 1 ? std::sqrt(spread / (count - 1.0)) : 0.0;
      s.mean_uncertainty_percent = u_sum / count;
      s.coverage = static_cast<double>(covered) / count;
    }
    out.push_back(s);
  }
  return out;
}

std::string trials_csv(std::span<const std::string> labels,
                       std::span<const std::vector<TrialOutcome>> outcomes) {
  std::ostringstream out;
  out.precision(10);
  out << "method,seed,endpoint,true_ml,endpoint_ml,uncertainty_ml,error_ml,error_percent,"
         "within_2u,flags\n";
  for (std::size_t m = 0; m < labels.size() && m < outcomes.size(); ++m) {
    for (const auto& o : outcomes[m]) {
      // Appended piece by piece: GCC 12 at -O3 warns (-Wrestrict, a false
      // alarm) about a temporary string built from a literal and appended.
      std::string flags;
      auto add_flag = [&flags](const char* name) {
        if (!flags.empty())
          flags += ' ';
        flags += name;
      };
      for (QualityFlag f : o.flags)
        add_flag(quality_flag_name(f));
      if (!o.error.empty())
        add_flag("error");
      const auto match = match_endpoints(o);
      for (std::size_t k = 0; k < o.equivalence_ml.size(); ++k) {
        // Labels may hold commas (method options): quote them.
        out << '"' << labels[m] << "\"," << o.seed << ',' << k + 1 << ',' << o.equivalence_ml[k]
            << ',';
        if (match[k] >= 0) {
          const auto j = static_cast<std::size_t>(match[k]);
          const double error = o.endpoint_ml[j] - o.equivalence_ml[k];
          out << o.endpoint_ml[j] << ',' << o.uncertainty_ml[j] << ',' << error << ','
              << 100.0 * error / o.equivalence_ml[k] << ','
              << (std::abs(error) <= 2.0 * o.uncertainty_ml[j] ? 1 : 0);
        } else {
          out << ",,,,";
        }
        out << ',' << flags << '\n';
      }
    }
  }
  return out.str();
}

std::string trials_svg(const std::string& title, std::span<const std::string> labels,
                       std::span<const std::vector<TrialOutcome>> outcomes) {
  const double width = 760, panel_height = 170, left = 70, right = 20, top = 40, gap = 50;
  const std::size_t panels = std::min(labels.size(), outcomes.size());
  const double height = top + static_cast<double>(panels) * (panel_height + gap) + 10;
  std::ostringstream out;
  auto text = [](const std::string& s) {
    std::string escaped;
    for (char c : s) {
      if (c == '<')
        escaped += "&lt;";
      else if (c == '>')
        escaped += "&gt;";
      else if (c == '&')
        escaped += "&amp;";
      else
        escaped += c;
    }
    return escaped;
  };
  auto number = [](double x) {
    char buffer[32];
    std::snprintf(buffer, sizeof buffer, "%.3g", x);
    return std::string(buffer);
  };
  out << "<svg xmlns='http://www.w3.org/2000/svg' width='" << width << "' height='" << height
      << "' font-family='DejaVu Sans, sans-serif' font-size='12'>\n"
      << "<rect width='100%' height='100%' fill='white'/>\n"
      << "<text x='" << left << "' y='22' font-size='14' font-weight='bold'>" << text(title)
      << "</text>\n";
  const double plot_w = width - left - right;
  for (std::size_t p = 0; p < panels; ++p) {
    const double y0 = top + static_cast<double>(p) * (panel_height + gap);
    // Points: (curve number, error %, 2u %), every equivalence point.
    struct Dot {
      double x, error, band;
    };
    std::vector<Dot> dots;
    std::size_t index = 0;
    for (const auto& o : outcomes[p]) {
      ++index;
      const auto match = match_endpoints(o);
      for (std::size_t k = 0; k < o.equivalence_ml.size(); ++k) {
        if (match[k] < 0)
          continue;
        const auto j = static_cast<std::size_t>(match[k]);
        const double truth = o.equivalence_ml[k];
        dots.push_back({static_cast<double>(index), 100.0 * (o.endpoint_ml[j] - truth) / truth,
                        200.0 * o.uncertainty_ml[j] / truth});
      }
    }
    double y_max = 1e-6;
    for (const Dot& d : dots)
      y_max = std::max(y_max, std::abs(d.error) + d.band);
    const auto summary = summarise_trials(labels[p], outcomes[p]);
    std::string caption = labels[p];
    for (const auto& s : summary) {
      caption += "  |  point " + std::to_string(s.endpoint_index + 1) + ": found " +
                 std::to_string(s.found) + "/" + std::to_string(s.curves) + ", bias " +
                 number(s.bias_percent) + " %, sd " + number(s.sd_percent) + " %, within 2u " +
                 number(100.0 * s.coverage) + " %";
    }
    out << "<text x='" << left << "' y='" << y0 - 6 << "'>" << text(caption) << "</text>\n";
    out << "<rect x='" << left << "' y='" << y0 << "' width='" << plot_w << "' height='"
        << panel_height << "' fill='none' stroke='#444'/>\n";
    const double n = std::max<double>(1.0, static_cast<double>(outcomes[p].size()));
    auto sx = [&](double x) { return left + (x - 0.5) / n * plot_w; };
    auto sy = [&](double y) { return y0 + panel_height / 2 - y / y_max * (panel_height / 2 - 5); };
    out << "<line x1='" << left << "' x2='" << left + plot_w << "' y1='" << sy(0) << "' y2='"
        << sy(0) << "' stroke='#888'/>\n";
    for (double yv : {-y_max, y_max}) {
      out << "<text x='" << left - 5 << "' y='" << sy(yv) + 4 << "' text-anchor='end'>"
          << number(yv) << "</text>\n";
    }
    out << "<text x='" << left - 5 << "' y='" << sy(0) + 4 << "' text-anchor='end'>0</text>\n";
    out << "<text transform='translate(14," << y0 + panel_height / 2
        << ") rotate(-90)' text-anchor='middle'>error / %</text>\n";
    out << "<text x='" << left + plot_w / 2 << "' y='" << y0 + panel_height + 16
        << "' text-anchor='middle'>curve (seed order)</text>\n";
    for (const Dot& d : dots) {
      const bool miss = std::abs(d.error) > d.band;
      const char* colour = miss ? "#c00" : "#1f5fbf";
      out << "<line x1='" << sx(d.x) << "' x2='" << sx(d.x) << "' y1='" << sy(d.error - d.band)
          << "' y2='" << sy(d.error + d.band) << "' stroke='" << colour
          << "' stroke-opacity='0.5'/>\n"
          << "<circle cx='" << sx(d.x) << "' cy='" << sy(d.error) << "' r='2.2' fill='" << colour
          << "'/>\n";
    }
  }
  out << "</svg>\n";
  return out.str();
}

}  // namespace veq::detection
