#include "detection/fit_support.hpp"

#include <algorithm>
#include <cmath>

#include "chemistry/conditional.hpp"

namespace veq::detection::fit_support {

double nernst_slope_mv(double temperature_c, int charge) noexcept {
  constexpr double kR = 8.314462618;  // J/(mol K)
  constexpr double kF = 96485.33212;  // C/mol
  return 1000.0 * kR * (temperature_c + 273.15) * std::log(10.0) / (kF * std::max(charge, 1));
}

double curve_temperature_c(const Curve& curve, double fallback_c) noexcept {
  const auto& t = curve.temperature_c();
  if (t.empty())
    return fallback_c;
  double sum = 0.0;
  for (double x : t)
    sum += x;
  return sum / static_cast<double>(t.size());
}

std::optional<std::size_t> steepest_fall(std::span<const double> volume_ml,
                                         std::span<const double> y, double factor) {
  const std::size_t n = y.size();
  if (n < 5)
    return std::nullopt;
  // Running median of three, then the central difference over two steps.
  auto median = [&](std::size_t i) {
    if (i == 0 || i + 1 == n)
      return y[i];
    const double a = y[i - 1], b = y[i], c = y[i + 1];
    return std::max(std::min(a, b), std::min(std::max(a, b), c));
  };
  std::size_t best = 0;
  double best_slope = 0.0;
  double m_left = median(0), m_mid = median(1);
  for (std::size_t i = 1; i + 1 < n; ++i) {
    const double m_right = median(i + 1);
    const double slope = factor * (m_right - m_left) / (volume_ml[i + 1] - volume_ml[i - 1]);
    if (slope < best_slope) {
      best_slope = slope;
      best = i;
    }
    m_left = m_mid;
    m_mid = m_right;
  }
  if (best == 0 || best + 1 == n)
    return std::nullopt;
  return best;
}

double noise_sd_median(std::span<const double> volume_ml, std::span<const double> signal) {
  const std::size_t n = signal.size();
  if (n < 3)
    return 0.0;
  std::vector<double> squares(n - 2);
  for (std::size_t i = 1; i + 1 < n; ++i) {
    const double hl = volume_ml[i] - volume_ml[i - 1];
    const double hr = volume_ml[i + 1] - volume_ml[i];
    const double span = hl + hr;
    const double scaled = span * signal[i] - hr * signal[i - 1] - hl * signal[i + 1];
    squares[i - 1] = scaled * scaled / (span * span + hl * hl + hr * hr);
  }
  const auto middle = squares.begin() + static_cast<std::ptrdiff_t>(squares.size() / 2);
  std::nth_element(squares.begin(), middle, squares.end());
  return std::sqrt(*middle / 0.4549);
}

Minimum minimise(const std::function<double(double)>& f, double lo, double hi, double tolerance,
                 int max_evaluations) {
  // Brent's method as in his book (and in Numerical Recipes' "brent").
  constexpr double kGolden = 0.3819660112501051;
  double a = lo, b = hi;
  double x = a + kGolden * (b - a), w = x, v = x;
  double fx = f(x), fw = fx, fv = fx;
  int evaluations = 1;
  double d = 0.0, e = 0.0;
  while (evaluations < max_evaluations) {
    const double m = 0.5 * (a + b);
    const double tol1 = tolerance + 1e-12 * std::abs(x);
    const double tol2 = 2.0 * tol1;
    if (std::abs(x - m) <= tol2 - 0.5 * (b - a))
      break;
    bool golden = true;
    if (std::abs(e) > tol1) {
      const double r = (x - w) * (fx - fv);
      double q = (x - v) * (fx - fw);
      double p = (x - v) * q - (x - w) * r;
      q = 2.0 * (q - r);
      if (q > 0.0)
        p = -p;
      q = std::abs(q);
      const double e_old = e;
      e = d;
      if (std::abs(p) < std::abs(0.5 * q * e_old) && p > q * (a - x) && p < q * (b - x)) {
        d = p / q;
        const double u = x + d;
        if (u - a < tol2 || b - u < tol2)
          d = x < m ? tol1 : -tol1;
        golden = false;
      }
    }
    if (golden) {
      e = (x >= m ? a : b) - x;
      d = kGolden * e;
    }
    const double u = std::abs(d) >= tol1 ? x + d : x + (d > 0.0 ? tol1 : -tol1);
    const double fu = f(u);
    ++evaluations;
    if (fu <= fx) {
      (u >= x ? a : b) = x;
      v = w;
      fv = fw;
      w = x;
      fw = fx;
      x = u;
      fx = fu;
    } else {
      (u < x ? a : b) = u;
      if (fu <= fw || w == x) {
        v = w;
        fv = fw;
        w = u;
        fw = fu;
      } else if (fu <= fv || v == x || v == w) {
        v = u;
        fv = fu;
      }
    }
  }
  return {x, fx, evaluations};
}

veq::Result<chemistry::SampleComposition> sample_from_option(const nlohmann::json& value) {
  if (!value.is_object()) {
    return veq::make_error(veq::ErrorKind::invalid_input,
                           "must be a sample document (a JSON object)");
  }
  return chemistry::parse_sample_json(value.dump());
}

veq::Result<SampleChemistry> read_sample(const chemistry::SampleComposition& sample,
                                         const Curve& curve,
                                         const chemistry::ConstantsLibrary& library) {
  SampleChemistry out;
  out.sample = sample;
  if (curve.sample_volume_ml() > 0.0)
    out.sample.sample_volume_ml = curve.sample_volume_ml();
  out.sample_volume_ml = out.sample.sample_volume_ml;
  if (!(out.sample_volume_ml > 0.0)) {
    return veq::make_error(veq::ErrorKind::invalid_input,
                           "neither the curve nor the sample gives the sample volume; set "
                           "sample_volume_ml in the sample document");
  }
  if (out.sample.metals.empty())
    return veq::make_error(veq::ErrorKind::invalid_input, "the sample document lists no metal");
  if (!out.sample.signal.metal.empty()) {
    auto it = std::find_if(
        out.sample.metals.begin(), out.sample.metals.end(),
        [&](const chemistry::SampleMetal& m) { return m.name == out.sample.signal.metal; });
    if (it == out.sample.metals.end()) {
      return veq::make_error(
          veq::ErrorKind::invalid_input,
          "signal.metal '" + out.sample.signal.metal + "' is not one of the sample's metals");
    }
    out.signal_metal = static_cast<std::size_t>(it - out.sample.metals.begin());
  }
  const chemistry::MetalEntry* metal = library.find_metal(out.sample.metals[out.signal_metal].name);
  if (!metal) {
    return veq::make_error(
        veq::ErrorKind::invalid_input,
        "metal '" + out.sample.metals[out.signal_metal].name + "' is not in the constants library");
  }
  out.metal_charge = metal->charge;
  // Does anything but the titrant and hydroxide bind the signal metal?
  bool binds = !out.sample.ph.has_value() || out.sample.indicator.has_value();
  for (const auto& l : out.sample.ligands) {
    const chemistry::LigandEntry* entry = library.find_ligand(l.name);
    if (!entry) {
      return veq::make_error(veq::ErrorKind::invalid_input,
                             "ligand '" + l.name + "' is not in the constants library");
    }
    for (const auto& c : entry->complexes)
      binds = binds || c.metal == metal->name;
  }
  out.metal_fraction_varies = binds;
  return out;
}

double log10_metal_fraction_coefficient(const chemistry::TitrationModel& model,
                                        const chemistry::Speciation& speciation,
                                        std::size_t metal) {
  const auto& system = model.system();
  const auto mc = static_cast<std::size_t>(model.metal_component(metal));
  const auto tc = static_cast<std::size_t>(model.titrant_component());
  double not_titrant = speciation.free_mol_per_l[mc];
  for (std::size_t i = 0; i < system.species.size(); ++i) {
    const auto& st = system.species[i].stoichiometry;
    if (st[mc] > 0 && st[tc] == 0)
      not_titrant += st[mc] * speciation.species_mol_per_l[i];
  }
  return std::log10(not_titrant) - speciation.log10_free[mc];
}

veq::Result<std::vector<std::size_t>> titration_order(const chemistry::SampleComposition& sample,
                                                      const chemistry::ConstantsLibrary& library) {
  std::vector<chemistry::LigandTotal> ligands;
  for (const auto& l : sample.ligands)
    ligands.push_back({l.name, l.total_mol_per_l});
  std::vector<double> strength;
  for (const auto& m : sample.metals) {
    auto k = chemistry::conditional_constant(library, m.name, sample.titrant.name,
                                             sample.ph.value_or(7.0), ligands);
    if (!k)
      return k.error();
    strength.push_back(k->log10_conditional + std::log10(m.conc_mol_per_l));
  }
  std::vector<std::size_t> order(sample.metals.size());
  for (std::size_t i = 0; i < order.size(); ++i)
    order[i] = i;
  std::stable_sort(order.begin(), order.end(),
                   [&](std::size_t a, std::size_t b) { return strength[a] > strength[b]; });
  return order;
}

}  // namespace veq::detection::fit_support
