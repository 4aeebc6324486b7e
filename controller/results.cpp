#include "controller/results.hpp"

#include <cmath>
#include <string>

#include "controller/messages.hpp"

namespace veq::controller {

namespace {

veq::Result<void> check_titrant(const TitrantVolume& t, const char* role) {
  const std::string who = std::string(role) + " titrant ";
  if (!std::isfinite(t.nominal_conc_mol_per_l) || t.nominal_conc_mol_per_l <= 0.0)
    return invalid_input(who + "nominal_conc_mol_per_l: " +
                         message_number(t.nominal_conc_mol_per_l) + " must be positive");
  if (!std::isfinite(t.titer) || t.titer <= 0.0)
    return invalid_input(who + "titer: " + message_number(t.titer) + " must be positive");
  if (!std::isfinite(t.volume_ml) || t.volume_ml < 0.0)
    return invalid_input(who + "volume_ml: " + message_number(t.volume_ml) + " must be 0 or more");
  if (!std::isfinite(t.blank_ml) || t.blank_ml < 0.0)
    return invalid_input(who + "blank_ml: " + message_number(t.blank_ml) + " must be 0 or more");
  if (!std::isfinite(t.analyte_per_titrant) || t.analyte_per_titrant <= 0.0)
    return invalid_input(who + "analyte_per_titrant: " + message_number(t.analyte_per_titrant) +
                         " must be positive");
  return {};
}

double amount(const TitrantVolume& t) {
  return t.nominal_conc_mol_per_l * t.titer * (t.volume_ml - t.blank_ml) / 1000.0 *
         t.analyte_per_titrant;
}

}  // namespace

veq::Result<double> analyte_amount_mol(const TitrantVolume& t) {
  if (auto ok = check_titrant(t, "the"); !ok)
    return ok.error();
  if (t.blank_ml > t.volume_ml) {
    return invalid_input("blank_ml: the blank " + message_number(t.blank_ml) +
                         " mL exceeds the endpoint " + message_number(t.volume_ml) + " mL");
  }
  return amount(t);
}

veq::Result<double> back_titration_amount_mol(const TitrantVolume& excess,
                                              const TitrantVolume& back) {
  if (auto ok = check_titrant(excess, "the excess"); !ok)
    return ok.error();
  if (auto ok = check_titrant(back, "the back"); !ok)
    return ok.error();
  const double added = amount(excess);
  const double left = amount(back);
  if (left > added) {
    return invalid_input("the back-titration used " + message_number(left * 1000.0) +
                         " mmol, more than the excess of " + message_number(added * 1000.0) +
                         " mmol added: the excess was too small or a volume is wrong");
  }
  return added - left;
}

veq::Result<TwoMetalAmounts> amounts_from_total_and_first(const TitrantVolume& total,
                                                          const TitrantVolume& first) {
  auto t = analyte_amount_mol(total);
  if (!t)
    return t.error();
  auto f = analyte_amount_mol(first);
  if (!f)
    return f.error();
  if (*f > *t * (1.0 + 1e-12)) {
    return invalid_input("the first metal (" + message_number(*f * 1000.0) +
                         " mmol) exceeds the total of both (" + message_number(*t * 1000.0) +
                         " mmol)");
  }
  return TwoMetalAmounts{*f, std::max(0.0, *t - *f)};
}

veq::Result<CountedTitrant> titrant_between(const std::vector<StageReading>& stages,
                                            std::size_t from_stage, bool from_endpoint,
                                            std::size_t to_stage) {
  if (from_stage < 1 || to_stage > stages.size() || from_stage > to_stage) {
    return invalid_input("stages " + std::to_string(from_stage) + " to " +
                         std::to_string(to_stage) + " are not within the " +
                         std::to_string(stages.size()) + " stages measured");
  }
  if (from_endpoint && from_stage == to_stage)
    return invalid_input("counting from a stage's own endpoint to itself counts nothing");
  for (std::size_t k = from_stage; k <= to_stage; ++k) {
    const StageReading& s = stages[k - 1];
    if (!std::isfinite(s.endpoint_ml) || !std::isfinite(s.dosed_ml) ||
        !std::isfinite(s.endpoint_uncertainty_ml) || s.endpoint_ml < 0.0)
      return invalid_input("stage " + std::to_string(k) +
                           ": endpoint and dosed volume must be "
                           "finite and not negative");
    if (k < to_stage && s.endpoint_ml > s.dosed_ml + 1e-9)
      return invalid_input("stage " + std::to_string(k) + ": endpoint " +
                           message_number(s.endpoint_ml) + " mL lies beyond the " +
                           message_number(s.dosed_ml) + " mL the stage dosed");
  }
  CountedTitrant out;
  for (std::size_t k = from_stage; k < to_stage; ++k)
    out.volume_ml += stages[k - 1].dosed_ml;
  const StageReading& last = stages[to_stage - 1];
  out.volume_ml += last.endpoint_ml;
  double u2 = last.endpoint_uncertainty_ml * last.endpoint_uncertainty_ml;
  if (from_endpoint) {
    const StageReading& first = stages[from_stage - 1];
    out.volume_ml -= first.endpoint_ml;
    u2 += first.endpoint_uncertainty_ml * first.endpoint_uncertainty_ml;
  }
  out.uncertainty_ml = std::sqrt(u2);
  return out;
}

const char* result_unit_name(ResultUnit unit) noexcept {
  switch (unit) {
    case ResultUnit::mol_per_l:
      return "mol/L";
    case ResultUnit::mmol_per_l:
      return "mmol/L";
    case ResultUnit::mg_per_l:
      return "mg/L";
    case ResultUnit::mass_percent:
      return "% w/w";
    case ResultUnit::mg_per_kg:
      return "mg/kg";
  }
  return "mol/L";
}

std::optional<ResultUnit> result_unit_from_name(std::string_view name) {
  for (ResultUnit u : {ResultUnit::mol_per_l, ResultUnit::mmol_per_l, ResultUnit::mg_per_l,
                       ResultUnit::mass_percent, ResultUnit::mg_per_kg}) {
    if (name == result_unit_name(u))
      return u;
  }
  return std::nullopt;
}

veq::Result<double> concentration(double amount_mol, const SampleSize& s, ResultUnit unit,
                                  double molar_mass) {
  if (!std::isfinite(amount_mol) || amount_mol < 0.0)
    return invalid_input("amount " + message_number(amount_mol) + " mol is not a usable amount");
  if (!std::isfinite(s.dilution_factor) || s.dilution_factor < 1.0)
    return invalid_input("dilution_factor: " + message_number(s.dilution_factor) +
                         " must be 1 or more");
  const bool by_volume = s.aliquot_ml > 0.0;
  const bool by_mass = s.mass_g > 0.0;
  if (by_volume == by_mass) {
    return invalid_input(by_volume ? "sample size: give either aliquot_ml or mass_g, not both"
                                   : "sample size: aliquot_ml or mass_g must be positive");
  }
  if (!std::isfinite(s.aliquot_ml) || !std::isfinite(s.mass_g))
    return invalid_input("sample size is not a number");
  const bool mass_unit = unit == ResultUnit::mass_percent || unit == ResultUnit::mg_per_kg;
  const bool needs_molar_mass = unit == ResultUnit::mg_per_l || mass_unit;
  if (needs_molar_mass && !(std::isfinite(molar_mass) && molar_mass > 0.0)) {
    return invalid_input(std::string("a result in ") + result_unit_name(unit) +
                         " needs the analyte's molar mass");
  }
  if (by_volume == mass_unit && !(std::isfinite(s.density_g_per_ml) && s.density_g_per_ml > 0.0)) {
    return invalid_input(
        std::string("a ") + (by_volume ? "sample measured by volume" : "weighed sample") +
        " reported in " + result_unit_name(unit) + " needs the sample's density_g_per_ml");
  }
  // Amount in the original sample per litre or per gram of it.
  const double original_amount = amount_mol * s.dilution_factor;
  const double volume_l =
      by_volume ? s.aliquot_ml / 1000.0 : s.mass_g / s.density_g_per_ml / 1000.0;
  const double mass_g = by_mass ? s.mass_g : s.aliquot_ml * s.density_g_per_ml;
  switch (unit) {
    case ResultUnit::mol_per_l:
      return original_amount / volume_l;
    case ResultUnit::mmol_per_l:
      return 1000.0 * original_amount / volume_l;
    case ResultUnit::mg_per_l:
      return 1000.0 * original_amount * molar_mass / volume_l;
    case ResultUnit::mass_percent:
      return 100.0 * original_amount * molar_mass / mass_g;
    case ResultUnit::mg_per_kg:
      return 1.0e6 * original_amount * molar_mass / mass_g;
  }
  return invalid_input("unknown unit");
}

WaterHardness water_hardness(double mmol_per_l) {
  // Molar masses from the IUPAC 2021 atomic weights: CaCO3 100.086 g/mol,
  // CaO 56.077 g/mol.
  constexpr double kCalciumCarbonate = 100.086, kCalciumOxide = 56.077;
  WaterHardness h;
  h.mmol_per_l = mmol_per_l;
  h.mg_per_l_as_caco3 = mmol_per_l * kCalciumCarbonate;
  h.german_degrees = mmol_per_l * kCalciumOxide / 10.0;
  h.french_degrees = mmol_per_l * kCalciumCarbonate / 10.0;
  return h;
}

veq::Result<GrubbsCritical> grubbs_critical(std::size_t n) {
  // ISO 5725-2:1994, table 5 (recalled from memory), n = 3 to 20.
  static constexpr GrubbsCritical kTable[] = {
      {1.155, 1.155}, {1.481, 1.496}, {1.715, 1.764}, {1.887, 1.973}, {2.020, 2.139},
      {2.126, 2.274}, {2.215, 2.387}, {2.290, 2.482}, {2.355, 2.564}, {2.412, 2.636},
      {2.462, 2.699}, {2.507, 2.755}, {2.549, 2.806}, {2.585, 2.852}, {2.620, 2.894},
      {2.651, 2.932}, {2.681, 2.968}, {2.709, 3.001}};
  if (n < 3 || n > 20) {
    return invalid_input("the Grubbs test's table covers 3 to 20 values, not " + std::to_string(n));
  }
  return kTable[n - 3];
}

veq::Result<ReplicateStatistics> replicate_statistics(const std::vector<double>& values,
                                                      std::optional<double> repeatability_sd) {
  if (values.empty())
    return invalid_input("replicate statistics need at least one value");
  for (std::size_t i = 0; i < values.size(); ++i) {
    if (!std::isfinite(values[i]))
      return invalid_input("replicate " + std::to_string(i + 1) + " is not a number");
  }
  if (repeatability_sd && !(std::isfinite(*repeatability_sd) && *repeatability_sd > 0.0))
    return invalid_input("repeatability_sd: must be a positive number");
  ReplicateStatistics s;
  s.count = values.size();
  const double n = static_cast<double>(values.size());
  for (double v : values)
    s.mean += v / n;
  if (values.size() > 1) {
    double sum = 0.0;
    for (double v : values)
      sum += (v - s.mean) * (v - s.mean);
    s.sd = std::sqrt(sum / (n - 1.0));
    s.rsd_percent = s.mean != 0.0 ? 100.0 * s.sd / std::abs(s.mean) : 0.0;
  }
  if (values.size() == 2 && repeatability_sd) {
    s.repeatability_limit = 2.8 * *repeatability_sd;
    s.duplicates_within_limit = std::abs(values[0] - values[1]) <= *s.repeatability_limit;
  }
  if (values.size() >= 3 && values.size() <= 20 && s.sd > 0.0) {
    OutlierTest t;
    for (std::size_t i = 0; i < values.size(); ++i) {
      const double g = std::abs(values[i] - s.mean) / s.sd;
      if (g > t.statistic) {
        t.statistic = g;
        t.suspect_index = i;
      }
    }
    const GrubbsCritical c = *grubbs_critical(values.size());
    t.critical_5_percent = c.five_percent;
    t.critical_1_percent = c.one_percent;
    // At n = 3 both critical values equal the largest possible statistic,
    // (n - 1)/sqrt(n) = 1.1547; the table rounds it to 1.155, so compare
    // with a rounding allowance.
    if (t.statistic > c.one_percent - 5e-4)
      t.verdict = "outlier";
    else if (t.statistic > c.five_percent - 5e-4)
      t.verdict = "straggler";
    s.outlier = t;
  }
  return s;
}

veq::Result<UncertaintyBudget> product_quotient_budget(double result,
                                                       std::vector<UncertaintyComponent> components,
                                                       double coverage_factor) {
  if (!std::isfinite(result))
    return invalid_input("the result is not a number");
  if (!std::isfinite(coverage_factor) || coverage_factor <= 0.0)
    return invalid_input("coverage_factor: must be positive");
  double variance = 0.0;
  for (UncertaintyComponent& c : components) {
    if (!std::isfinite(c.value) || c.value == 0.0)
      return invalid_input("uncertainty component '" + c.name +
                           "': its value must be a non-zero number");
    if (!std::isfinite(c.standard_uncertainty) || c.standard_uncertainty < 0.0) {
      return invalid_input("uncertainty component '" + c.name +
                           "': its standard uncertainty must be 0 or more");
    }
    c.relative_uncertainty = c.standard_uncertainty / std::abs(c.value);
    variance += c.relative_uncertainty * c.relative_uncertainty;
  }
  UncertaintyBudget b;
  b.result = result;
  for (UncertaintyComponent& c : components) {
    c.share_percent =
        variance > 0.0 ? 100.0 * c.relative_uncertainty * c.relative_uncertainty / variance : 0.0;
  }
  b.components = std::move(components);
  b.combined_relative = std::sqrt(variance);
  b.combined_standard = b.combined_relative * std::abs(result);
  b.coverage_factor = coverage_factor;
  b.expanded = coverage_factor * b.combined_standard;
  return b;
}

double net_volume_uncertainty_ml(double burette_tolerance_ml, double endpoint_uncertainty_ml,
                                 double blank_uncertainty_ml) {
  const double burette = burette_tolerance_ml / std::sqrt(3.0);
  return std::sqrt(burette * burette + endpoint_uncertainty_ml * endpoint_uncertainty_ml +
                   blank_uncertainty_ml * blank_uncertainty_ml);
}

}  // namespace veq::controller
