#include "detection/gran.hpp"

#include <algorithm>
#include <array>
#include <cmath>
#include <stdexcept>
#include <string>
#include <utility>
#include <vector>

#include "chemistry/prediction.hpp"
#include "detection/fit_support.hpp"
#include "detection/local_fit.hpp"

namespace veq::detection {

const char* gran_sides_name(GranSides sides) noexcept {
  switch (sides) {
    case GranSides::both:
      return "both";
    case GranSides::before:
      return "before";
    case GranSides::after:
      return "after";
  }
  return "both";
}

std::optional<GranSides> gran_sides_from_name(std::string_view name) {
  for (GranSides s : {GranSides::both, GranSides::before, GranSides::after}) {
    if (name == gran_sides_name(s))
      return s;
  }
  return std::nullopt;
}

nlohmann::json to_json(const GranOptions& options) {
  nlohmann::json j = {{"slope_mv_per_decade", options.slope_mv_per_decade},
                      {"sides", gran_sides_name(options.sides)},
                      {"correct_metal_fraction", options.correct_metal_fraction},
                      {"acceptance_sigma", options.acceptance_sigma},
                      {"min_points_per_side", options.min_points_per_side}};
  if (options.sample)
    j["sample"] = chemistry::to_json(*options.sample);
  return j;
}

namespace {

veq::Error option_error(const std::string& field, const std::string& what) {
  return veq::make_error(veq::ErrorKind::invalid_input, "gran option '" + field + "': " + what);
}

constexpr double kLn10 = 2.302585092994045684;

// Largest bend of a Gran function by the incomplete reaction near the
// equivalence point that a point may have and stay in its line, in units of
// one reading's relative noise (see find_endpoints_by_gran).
constexpr double kIncompleteFraction = 0.3;

}  // namespace

veq::Result<void> validate(const GranOptions& o) {
  if (!std::isfinite(o.slope_mv_per_decade) || o.slope_mv_per_decade < 0.0) {
    return option_error("slope_mv_per_decade", "must be a finite number >= 0 (0 = fit)");
  }
  if (!std::isfinite(o.acceptance_sigma) || o.acceptance_sigma <= 0.0) {
    return option_error("acceptance_sigma", "must be a finite number > 0");
  }
  if (o.min_points_per_side < 3)
    return option_error("min_points_per_side", "must be >= 3");
  return {};
}

veq::Result<GranOptions> gran_options_from_json(const nlohmann::json& json) {
  if (!json.is_object()) {
    return veq::make_error(veq::ErrorKind::invalid_input, "gran options must be a JSON object");
  }
  GranOptions o;
  for (const auto& [key, value] : json.items()) {
    if (key == "slope_mv_per_decade" || key == "acceptance_sigma") {
      if (!value.is_number())
        return option_error(key, "must be a number");
      (key == "slope_mv_per_decade" ? o.slope_mv_per_decade : o.acceptance_sigma) =
          value.get<double>();
    } else if (key == "sides") {
      const auto sides = value.is_string() ? gran_sides_from_name(value.get<std::string>())
                                           : std::optional<GranSides>{};
      if (!sides)
        return option_error(key, "must be \"both\", \"before\" or \"after\"");
      o.sides = *sides;
    } else if (key == "correct_metal_fraction") {
      if (!value.is_boolean())
        return option_error(key, "must be true or false");
      o.correct_metal_fraction = value.get<bool>();
    } else if (key == "min_points_per_side") {
      if (!value.is_number_integer())
        return option_error(key, "must be an integer");
      o.min_points_per_side = value.get<int>();
    } else if (key == "sample") {
      if (!value.is_object())
        return option_error(key, "must be a sample document (a JSON object)");
      auto sample = chemistry::parse_sample_json(value.dump());
      if (!sample)
        return option_error(key, sample.error().message);
      o.sample = std::move(*sample);
    } else {
      return option_error(key,
                          "unknown option; known: slope_mv_per_decade, sides, "
                          "correct_metal_fraction, acceptance_sigma, min_points_per_side, sample");
    }
  }
  if (auto ok = validate(o); !ok)
    return ok.error();
  return o;
}

namespace {

// Least squares on relative residuals: minimises sum (1 - (a + b x_i) h_i)^2
// with h_i = 1 / G_i and x_i = V_i - centre, so that a + b x is the line
// through the Gran function and every point weighs as its signal noise does
// (a relative change of G is ln(10)/S times a change of the signal). Sums
// are kept so that points can be added and removed one at a time.
class RelativeLine {
 public:
  explicit RelativeLine(double centre) : centre_(centre) {}
  double centre() const { return centre_; }
  void add(double v, double h) { update(v, h, 1.0); }
  void remove(double v, double h) { update(v, h, -1.0); }
  double count() const { return m_; }
  // Solves the 2x2 normal equations; false when they are singular.
  bool solve() {
    det_ = spp_ * sqq_ - spq_ * spq_;
    if (!(det_ > 1e-300 * std::max(spp_ * sqq_, 1e-300)) || m_ < 2.0)
      return false;
    a_ = (sp_ * sqq_ - sq_ * spq_) / det_;
    b_ = (spp_ * sq_ - spq_ * sp_) / det_;
    return true;
  }
  double a() const { return a_; }
  double b() const { return b_; }
  double residual(double v, double h) const { return 1.0 - (a_ + b_ * (v - centre_)) * h; }
  // [h, x h] M^-1 [h, x h]^T: the fitted value's variance per unit variance.
  double leverage(double v, double h) const {
    const double p = h, q = (v - centre_) * h;
    return (sqq_ * p * p - 2.0 * spq_ * p * q + spp_ * q * q) / det_;
  }
  // Zero of the line, mL, and its variance per unit residual variance.
  double zero_ml() const { return centre_ - a_ / b_; }
  double zero_variance_factor() const {
    const double x0 = -a_ / b_;
    // Var(a) = sqq/det, Var(b) = spp/det, Cov(a, b) = -spq/det; the zero
    // x0 = -a/b has gradient (-1/b, a/b^2) = -(1, x0)/b.
    return (sqq_ + x0 * x0 * spp_ + 2.0 * x0 * spq_) / det_ / (b_ * b_);
  }

 private:
  void update(double v, double h, double sign) {
    const double p = h, q = (v - centre_) * h;
    m_ += sign;
    spp_ += sign * p * p;
    spq_ += sign * p * q;
    sqq_ += sign * q * q;
    sp_ += sign * p;
    sq_ += sign * q;
  }
  double centre_;
  double m_ = 0.0, spp_ = 0.0, spq_ = 0.0, sqq_ = 0.0, sp_ = 0.0, sq_ = 0.0;
  double det_ = 0.0, a_ = 0.0, b_ = 0.0;
};

// One side's Gran function at every point of the side: ln G_i, and the
// points ordered from the outer end of the curve towards the break.
struct Side {
  bool before = true;
  std::vector<std::size_t> order;  // indices into the curve, outer end first
};

struct SideFit {
  bool ok = false;
  std::vector<std::size_t> used;     // indices in the fit, outer end first
  std::vector<std::size_t> skipped;  // single points turned away (spikes)
  double zero_ml = 0.0;
  double zero_variance_factor = 0.0;
  double sse = 0.0;                       // sum of squared relative residuals
  double residual_var = 0.0;              // sse / (m - 2)
  double a = 0.0, b = 0.0, centre = 0.0;  // G / exp(ref) = a + b (V - centre)
  double ref = 0.0;                       // ln G reference of h
};

// The Gran function's logarithm at curve point i for slope s (signal units
// per decade, signed): before: ln(V0 + V) + ln(10) (E - Eref) / s + ln alpha;
// after: -ln(10) (E - Eref) / s.
struct GranFunction {
  const std::vector<double>* volume_ml = nullptr;
  const std::vector<double>* signal = nullptr;
  double reference = 0.0;                          // Eref
  double sample_volume_ml = 0.0;                   // 0: no dilution factor
  const std::vector<double>* log_alpha = nullptr;  // ln alpha_M, or null

  double ln_g(std::size_t i, bool before, double slope) const {
    const double y = kLn10 * ((*signal)[i] - reference) / slope;
    if (!before)
      return -y;
    double g = y;
    if (sample_volume_ml > 0.0)
      g += std::log(sample_volume_ml + (*volume_ml)[i]);
    if (log_alpha)
      g += (*log_alpha)[i];
    return g;
  }
};

// Regression over a fixed set of points with the centre at the weighted mean
// (two passes, well conditioned), residuals summed explicitly.
SideFit regress(const GranFunction& f, bool before, double slope,
                const std::vector<std::size_t>& used) {
  SideFit fit;
  fit.used = used;
  if (used.size() < 3)
    return fit;
  const auto& v = *f.volume_ml;
  std::vector<double> lg(used.size());
  double ref = -INFINITY;
  for (std::size_t k = 0; k < used.size(); ++k) {
    lg[k] = f.ln_g(used[k], before, slope);
    ref = std::max(ref, lg[k]);
  }
  // Centre at the h^2-weighted mean volume: near the break, where h is largest.
  double sw = 0.0, swv = 0.0;
  std::vector<double> h(used.size());
  for (std::size_t k = 0; k < used.size(); ++k) {
    h[k] = std::exp(ref - lg[k]);
    sw += h[k] * h[k];
    swv += h[k] * h[k] * v[used[k]];
  }
  RelativeLine line(swv / sw);
  for (std::size_t k = 0; k < used.size(); ++k)
    line.add(v[used[k]], h[k]);
  if (!line.solve() || !(line.b() != 0.0))
    return fit;
  double sse = 0.0;
  for (std::size_t k = 0; k < used.size(); ++k) {
    const double r = line.residual(v[used[k]], h[k]);
    sse += r * r;
  }
  fit.ok = std::isfinite(line.zero_ml());
  fit.zero_ml = line.zero_ml();
  fit.zero_variance_factor = line.zero_variance_factor();
  fit.sse = sse;
  fit.residual_var = sse / static_cast<double>(used.size() - 2);
  fit.a = line.a();
  fit.b = line.b();
  fit.centre = line.centre();
  fit.ref = ref;
  return fit;
}

// Chooses the straight part of one side and fits it (see find_endpoints_by_gran).
SideFit select_and_fit(const GranFunction& f, const Side& side, double slope, double sigma_r,
                       double acceptance) {
  const auto& v = *f.volume_ml;
  const std::size_t count = side.order.size();
  SideFit none;
  if (count < 3)
    return none;
  std::vector<double> lg(count);
  double ref = -INFINITY;
  for (std::size_t k = 0; k < count; ++k) {
    lg[k] = f.ln_g(side.order[k], side.before, slope);
    ref = std::max(ref, lg[k]);
  }
  auto h = [&](std::size_t k) { return std::exp(ref - lg[k]); };
  RelativeLine line(v[side.order.back()]);
  std::vector<std::size_t> used;  // positions in side.order
  std::vector<std::size_t> skipped;
  const std::size_t seed =
      std::clamp<std::size_t>((count + 1) / 2, std::min<std::size_t>(3, count), count);
  for (std::size_t k = 0; k < seed; ++k) {
    line.add(v[side.order[k]], h(k));
    used.push_back(k);
  }
  if (!line.solve())
    return none;
  // Spikes in the seed: drop the worst point while it lies beyond five noise
  // standard deviations (a Gaussian reading does so once in 3.5 million).
  for (std::size_t round = 0; round < seed / 4 && used.size() > 3; ++round) {
    std::size_t worst = 0;
    double worst_r = 0.0;
    for (std::size_t u = 0; u < used.size(); ++u) {
      const double r = std::abs(line.residual(v[side.order[used[u]]], h(used[u])));
      if (r > worst_r) {
        worst_r = r;
        worst = u;
      }
    }
    if (worst_r <= 5.0 * sigma_r)
      break;
    line.remove(v[side.order[used[worst]]], h(used[worst]));
    skipped.push_back(used[worst]);
    used.erase(used.begin() + static_cast<std::ptrdiff_t>(worst));
    if (!line.solve())
      return none;
  }
  // Grow towards the break.
  int misses = 0;
  std::vector<std::size_t> missed;
  for (std::size_t k = seed; k < count; ++k) {
    const double x = v[side.order[k]];
    const double hk = h(k);
    const double r = line.residual(x, hk);
    const double limit = acceptance * sigma_r * std::sqrt(1.0 + line.leverage(x, hk));
    if (std::abs(r) <= limit) {
      for (std::size_t m : missed)
        skipped.push_back(m);
      missed.clear();
      misses = 0;
      line.add(x, hk);
      used.push_back(k);
      if (!line.solve())
        return none;
    } else {
      // Three misses in a row end the line (noise alone does that about
      // once in 50 million points); fewer are single bad readings, skipped.
      missed.push_back(k);
      if (++misses >= 3)
        break;
    }
  }
  // The curved region bends away gradually, so single points pass while
  // together they pull the line: drop inner points while the mean residual
  // of the innermost few departs from zero by more than `acceptance` of its
  // standard error.
  while (used.size() > 4) {
    const std::size_t run = std::max<std::size_t>(3, used.size() / 10);
    double mean = 0.0;
    for (std::size_t u = used.size() - run; u < used.size(); ++u)
      mean += line.residual(v[side.order[used[u]]], h(used[u]));
    mean /= static_cast<double>(run);
    if (std::abs(mean) <= acceptance * sigma_r / std::sqrt(static_cast<double>(run)))
      break;
    line.remove(v[side.order[used.back()]], h(used.back()));
    used.pop_back();
    if (!line.solve())
      return none;
  }
  std::vector<std::size_t> indices;
  for (std::size_t u : used)
    indices.push_back(side.order[u]);
  SideFit fit = regress(f, side.before, slope, indices);
  for (std::size_t s : skipped)
    fit.skipped.push_back(side.order[s]);
  std::sort(fit.skipped.begin(), fit.skipped.end());
  return fit;
}

struct Combined {
  bool ok = false;
  double volume_ml = 0.0;
  double variance = 0.0;  // from the regressions (slope fixed)
  double chi2 = 0.0;      // of the two zeros against each other
};

Combined combine(const SideFit* before, const SideFit* after, double sigma_r2) {
  auto variance = [&](const SideFit& s) {
    return std::max(s.residual_var, sigma_r2) * s.zero_variance_factor;
  };
  Combined c;
  const bool b_ok = before && before->ok;
  const bool a_ok = after && after->ok;
  if (b_ok && a_ok) {
    const double u1 = variance(*before), u2 = variance(*after);
    const double w1 = 1.0 / u1, w2 = 1.0 / u2;
    c.volume_ml = (w1 * before->zero_ml + w2 * after->zero_ml) / (w1 + w2);
    c.variance = 1.0 / (w1 + w2);
    const double d = before->zero_ml - after->zero_ml;
    c.chi2 = d * d / (u1 + u2);
    c.ok = true;
  } else if (b_ok || a_ok) {
    const SideFit& s = b_ok ? *before : *after;
    c.volume_ml = s.zero_ml;
    c.variance = variance(s);
    c.ok = true;
  }
  return c;
}

// ln alpha_M at each point of the curve from the chemistry engine, for the
// sample with its metal scaled so that the signal metal's equivalence volume
// is `equivalence_ml` (the bound auxiliary ligand depends on it, weakly).
// ln alpha_M is smooth in the volume (the dilution of the ligand, and the
// ligand released as the metal is bound), so it is computed at
// kMetalFractionNodes evenly spaced volumes and interpolated linearly: with
// 40 nodes over a curve the error stays near 1e-5, far below the noise.
constexpr std::size_t kMetalFractionNodes = 40;

veq::Result<std::vector<double>> log_metal_fraction(const Curve& curve,
                                                    const fit_support::SampleChemistry& chem,
                                                    const chemistry::ConstantsLibrary& library,
                                                    double equivalence_ml) {
  chemistry::SampleComposition sample = chem.sample;
  const double nominal_ml = sample.metals[chem.signal_metal].conc_mol_per_l *
                            sample.sample_volume_ml / sample.titrant.conc_mol_per_l;
  if (equivalence_ml > 0.0 && sample.metals.size() == 1)
    sample.metals[0].conc_mol_per_l *= equivalence_ml / nominal_ml;
  auto model = chemistry::TitrationModel::create(library, sample);
  if (!model)
    return model.error();
  const auto& v = curve.volume_ml();
  const double first = v.front(), last = v.back();
  const std::size_t nodes = std::min(kMetalFractionNodes, v.size());
  std::vector<double> node_ml(nodes), node_value(nodes);
  chemistry::Speciation work, previous;
  for (std::size_t k = 0; k < nodes; ++k) {
    node_ml[k] =
        nodes > 1 ? first + (last - first) * static_cast<double>(k) / static_cast<double>(nodes - 1)
                  : first;
    auto solved = model->solve_at(node_ml[k], work, k > 0 ? &previous : nullptr);
    if (!solved)
      return solved.error();
    node_value[k] =
        kLn10 * fit_support::log10_metal_fraction_coefficient(*model, work, chem.signal_metal);
    std::swap(work, previous);
  }
  std::vector<double> out(v.size());
  std::size_t k = 0;
  for (std::size_t i = 0; i < v.size(); ++i) {
    while (k + 2 < nodes && v[i] > node_ml[k + 1])
      ++k;
    if (nodes == 1) {
      out[i] = node_value[0];
      continue;
    }
    const double t = (v[i] - node_ml[k]) / (node_ml[k + 1] - node_ml[k]);
    out[i] = node_value[k] + t * (node_value[k + 1] - node_value[k]);
  }
  return out;
}

}  // namespace

veq::Result<Evaluation> find_endpoints_by_gran(const Curve& curve, const GranOptions& options) {
  if (options.sample) {
    // The metal's charge (for the Nernst slope) and the metal fraction come
    // from the library.
    auto library = chemistry::builtin_constants_library();
    if (!library)
      return library.error();
    return find_endpoints_by_gran(curve, options, *library);
  }
  return find_endpoints_by_gran(curve, options, chemistry::ConstantsLibrary{});
}

veq::Result<Evaluation> find_endpoints_by_gran(const Curve& curve, const GranOptions& options,
                                               const chemistry::ConstantsLibrary& library) {
  if (auto ok = validate(options); !ok)
    throw std::invalid_argument(ok.error().message);
  Evaluation result;
  result.method = "gran";
  result.options = to_json(options);

  const bool potential = curve.kind() == SignalKind::potential_mv;
  if (!potential && curve.kind() != SignalKind::p_metal) {
    result.flags.push_back(QualityFlag::signal_out_of_range);
    result.flags.push_back(QualityFlag::no_endpoint);
    result.details["reason"] =
        std::string("the Gran method needs a potential_mv or p_metal curve, not ") +
        signal_kind_name(curve.kind());
    return result;
  }

  // The sample's chemistry, when given.
  std::optional<fit_support::SampleChemistry> chem;
  bool library_needed = false;
  if (options.sample) {
    auto read = fit_support::read_sample(*options.sample, curve, library);
    if (!read)
      return read.error();
    chem = std::move(*read);
    library_needed = options.correct_metal_fraction && chem->metal_fraction_varies;
  }
  const double sample_volume_ml = curve.sample_volume_ml() > 0.0
                                      ? curve.sample_volume_ml()
                                      : (options.sample ? options.sample->sample_volume_ml : 0.0);
  if (!(sample_volume_ml > 0.0))
    result.flags.push_back(QualityFlag::dilution_not_corrected);
  if (chem && chem->metal_fraction_varies && !library_needed)
    result.flags.push_back(QualityFlag::metal_fraction_not_corrected);

  const std::vector<double>& v = curve.volume_ml();
  const std::size_t n = v.size();
  // The signal as log10 of the metal concentration times the slope: E for a
  // potential, -pM for pM (slope 1).
  std::vector<double> e;
  if (potential) {
    e = curve.signal();
  } else {
    e.resize(n);
    for (std::size_t i = 0; i < n; ++i)
      e[i] = -curve.signal()[i];
  }
  const int charge = chem ? chem->metal_charge : 2;
  const double temperature_c = fit_support::curve_temperature_c(
      curve, options.sample ? options.sample->signal.temperature_c : 25.0);
  const double nernst = potential ? fit_support::nernst_slope_mv(temperature_c, charge) : 1.0;
  // A cation electrode's potential falls as the metal is bound: the sign of
  // the slope follows the curve (mean of the first and last fifth).
  double head = 0.0, tail = 0.0;
  const std::size_t fifth = std::max<std::size_t>(1, n / 5);
  for (std::size_t i = 0; i < fifth; ++i) {
    head += e[i];
    tail += e[n - 1 - i];
  }
  const double sign = head >= tail ? 1.0 : -1.0;
  const bool fit_slope = potential && options.slope_mv_per_decade == 0.0;
  double slope =
      sign *
      (potential && options.slope_mv_per_decade > 0.0 ? options.slope_mv_per_decade : nernst);

  std::vector<double> scratch;
  const double sigma_e = local_fit::noise_sd(v, e, scratch);
  std::vector<double> y(n);
  for (std::size_t i = 0; i < n; ++i)
    y[i] = e[i] / slope;
  const auto steepest = fit_support::steepest_fall(v, y);
  if (!steepest) {
    result.flags.push_back(QualityFlag::no_endpoint);
    return result;
  }
  double split = v[*steepest];
  const double reference = e[*steepest];

  // Relative noise of G: ln(10) sigma_E / |S|, with a floor for noise-free
  // curves (computed ones) so that the acceptance tests stay finite.
  auto sigma_r_of = [&](double s) { return std::max(kLn10 * sigma_e / std::abs(s), 1e-7); };

  std::vector<double> log_alpha;
  double alpha_for_ml = 0.0;  // equivalence volume the fractions were computed for
  GranFunction f{&v, &e, reference, sample_volume_ml, nullptr};

  auto make_sides = [&](double at) {
    Side before{true, {}}, after{false, {}};
    for (std::size_t i = 0; i < n; ++i) {
      if (v[i] < at)
        before.order.push_back(i);
    }
    for (std::size_t i = n; i-- > 0;) {
      if (v[i] > at)
        after.order.push_back(i);
    }
    return std::pair{before, after};
  };
  const bool use_before = options.sides != GranSides::after;
  const bool use_after = options.sides != GranSides::before;

  SideFit before_fit, after_fit;
  Combined combined;
  double slope_variance = 0.0, d_volume_d_slope = 0.0, d_difference_d_slope = 0.0;
  bool slope_at_limit = false;
  const double slope_lo = 0.5 * nernst, slope_hi = 1.25 * nernst;
  double previous_b1 = 0.0, previous_b2 = 0.0, previous_volume = 0.0;
  for (int pass = 0; pass < 5; ++pass) {
    if (library_needed) {
      const double target = combined.ok ? combined.volume_ml : 0.0;
      const bool stale =
          log_alpha.empty() || (target > 0.0 && std::abs(target - alpha_for_ml) > 0.01 * target);
      if (stale) {
        auto la = log_metal_fraction(curve, *chem, library, target);
        if (!la)
          return la.error();
        log_alpha = std::move(*la);
        alpha_for_ml = target > 0.0
                           ? target
                           : chem->sample.metals[chem->signal_metal].conc_mol_per_l *
                                 chem->sample_volume_ml / chem->sample.titrant.conc_mol_per_l;
        f.log_alpha = &log_alpha;
      }
    }
    auto [before_side, after_side] = make_sides(split);
    // Near the equivalence point the reaction is incomplete: before it the
    // function holds (V0 + V)([M'] - [Y']) instead of (V0 + V)[M'], after it
    // [M'] beside [Y']. The relative bend, delta = [Y']/[M'] before and
    // [M']/[Y'] after, follows from the two lines themselves (K' and the
    // titrant concentration cancel): with B1 = |slope before|, B2 = slope
    // after, both in the functions' own units,
    //   before: delta = V (V0 + V) alpha_M / (B1 B2 Ve (Ve - V)^2),
    //   after:  delta = (V0 + V) alpha_M / (B1 B2 (V - Ve)^2).
    // Points bent by more than a third of one reading's noise are left out
    // (the lines of the previous pass give B1, B2 and Ve). The heaviest
    // points of both lines lie next to the break, so without this the line
    // would lean on a point that the incomplete reaction has already bent.
    if (previous_b1 > 0.0 && previous_b2 > 0.0 && sample_volume_ml > 0.0) {
      const double limit = kIncompleteFraction * sigma_r_of(slope);
      const double ve = previous_volume;
      auto alpha = [&](std::size_t i) { return f.log_alpha ? std::exp(log_alpha[i]) : 1.0; };
      std::erase_if(before_side.order, [&](std::size_t i) {
        const double d = ve - v[i];
        return v[i] * (sample_volume_ml + v[i]) * alpha(i) >
               limit * previous_b1 * previous_b2 * ve * d * d;
      });
      std::erase_if(after_side.order, [&](std::size_t i) {
        const double d = v[i] - ve;
        return (sample_volume_ml + v[i]) * alpha(i) > limit * previous_b1 * previous_b2 * d * d;
      });
    }
    auto fit_sides = [&](double s) {
      const double sr = sigma_r_of(s);
      before_fit = select_and_fit(f, before_side, s, sr, options.acceptance_sigma);
      after_fit = select_and_fit(f, after_side, s, sr, options.acceptance_sigma);
    };
    fit_sides(slope);
    if (fit_slope) {
      // Slope that makes both functions straightest: least squares in signal
      // units, (S / ln 10)^2 times the relative residuals, over the ranges
      // just chosen.
      const auto b_used = before_fit.used;
      const auto a_used = after_fit.used;
      auto objective = [&](double s) {
        double q = 0.0;
        if (before_fit.ok)
          q += regress(f, true, s, b_used).sse;
        if (after_fit.ok)
          q += regress(f, false, s, a_used).sse;
        return q * (s / kLn10) * (s / kLn10);
      };
      const auto best =
          fit_support::minimise([&](double magnitude) { return objective(sign * magnitude); },
                                slope_lo, slope_hi, 1e-5 * nernst);
      slope = sign * best.x;
      slope_at_limit = best.x < slope_lo * 1.001 || best.x > slope_hi * 0.999;
      fit_sides(slope);
    }
    combined = combine(use_before ? &before_fit : nullptr, use_after ? &after_fit : nullptr,
                       sigma_r_of(slope) * sigma_r_of(slope));
    if (!combined.ok)
      break;
    previous_b1 =
        before_fit.ok && before_fit.b < 0.0 ? -before_fit.b * std::exp(before_fit.ref) : 0.0;
    previous_b2 = after_fit.ok && after_fit.b > 0.0 ? after_fit.b * std::exp(after_fit.ref) : 0.0;
    const double moved = std::abs(combined.volume_ml - previous_volume);
    previous_volume = combined.volume_ml;
    const bool alpha_settled =
        !library_needed || std::abs(combined.volume_ml - alpha_for_ml) <= 0.01 * combined.volume_ml;
    split = std::clamp(combined.volume_ml, v.front(), v.back());
    if (pass > 0 && moved <= 1e-4 * std::max(combined.volume_ml, 1e-9) && alpha_settled)
      break;
  }

  // The slope's own uncertainty, propagated (ranges fixed).
  if (combined.ok && fit_slope) {
    const auto b_used = before_fit.used;
    const auto a_used = after_fit.used;
    const double sr2 = sigma_r_of(slope) * sigma_r_of(slope);
    auto at = [&](double s) {
      SideFit bf, af;
      if (before_fit.ok)
        bf = regress(f, true, s, b_used);
      if (after_fit.ok)
        af = regress(f, false, s, a_used);
      double q = (bf.ok ? bf.sse : 0.0) + (af.ok ? af.sse : 0.0);
      q *= (s / kLn10) * (s / kLn10);
      const Combined c =
          combine(bf.ok && use_before ? &bf : nullptr, af.ok && use_after ? &af : nullptr, sr2);
      const double difference = bf.ok && af.ok ? bf.zero_ml - af.zero_ml : 0.0;
      return std::array<double, 3>{q, c.volume_ml, difference};
    };
    const double h = 0.01 * std::abs(slope);
    const auto mid = at(slope);
    const auto up = at(slope + h);
    const auto down = at(slope - h);
    const double q0 = mid[0];
    const double curvature = (up[0] - 2.0 * q0 + down[0]) / (h * h);
    const double points = static_cast<double>((before_fit.ok ? before_fit.used.size() : 0) +
                                              (after_fit.ok ? after_fit.used.size() : 0));
    const double dof = std::max(1.0, points - 5.0);
    const double signal_var = std::max(q0 / dof, sigma_e * sigma_e);
    if (curvature > 0.0)
      slope_variance = 2.0 * signal_var / curvature;
    d_volume_d_slope = (up[1] - down[1]) / (2.0 * h);
    d_difference_d_slope = (up[2] - down[2]) / (2.0 * h);
  }

  nlohmann::json details;
  details["slope_mv_per_decade"] = potential ? nlohmann::json(slope) : nlohmann::json(nullptr);
  details["slope_fitted"] = fit_slope;
  if (fit_slope) {
    details["slope_uncertainty_mv_per_decade"] = std::sqrt(slope_variance);
    details["slope_percent_of_nernst"] = 100.0 * std::abs(slope) / nernst;
  }
  if (potential)
    details["nernst_slope_mv_per_decade"] = nernst;
  details["noise_sd"] = sigma_e;
  details["metal_fraction_corrected"] = library_needed;
  auto side_details = [&](const SideFit& s) {
    nlohmann::json j;
    if (!s.ok || s.used.empty())
      return nlohmann::json(nullptr);
    const double sr2 = sigma_r_of(slope) * sigma_r_of(slope);
    j["zero_ml"] = s.zero_ml;
    j["uncertainty_ml"] = std::sqrt(std::max(s.residual_var, sr2) * s.zero_variance_factor);
    j["range_ml"] = {v[s.used.front()], v[s.used.back()]};
    j["points"] = s.used.size();
    j["skipped_points"] = s.skipped.size();
    // The line in the function's own units: G = intercept + slope_per_ml V,
    // with G = (V0 + V) 10^((E - Eref)/S) alpha_M before (mL; for pM curves
    // (V0 + V) [M] in mmol, so that the slope is minus the titrant
    // concentration) and 10^(-(E - Eref)/S) after.
    const double scale = std::exp(s.ref);
    j["line_slope_per_ml"] = s.b * scale;
    j["line_intercept"] = (s.a - s.b * s.centre) * scale;
    j["relative_residual_sd"] = std::sqrt(s.residual_var);
    return j;
  };
  // Both lines are fitted whichever gives the endpoint: each one's slope
  // tells the other where the incomplete reaction begins.
  details["before"] = side_details(before_fit);
  details["after"] = side_details(after_fit);
  details["sides_used"] = gran_sides_name(options.sides);
  details["reference_signal"] = potential ? reference : -reference;

  // Diagnostics: each function scaled to mL of titrant (its line then reads
  // Ve - V before and V - Ve after), the fitted lines, the points turned
  // away, and the metal fraction used.
  auto add_series = [&](const Side& side, const SideFit& s, const char* name,
                        const char* line_name) {
    if (!s.ok)
      return;
    const double scale = std::abs(s.b);
    std::vector<std::pair<double, double>> xy;
    for (std::size_t i : side.order)
      xy.emplace_back(v[i], std::exp(f.ln_g(i, side.before, slope) - s.ref) / scale);
    std::sort(xy.begin(), xy.end());
    DiagnosticSeries points{name, "mL", {}, {}};
    for (const auto& [x, g] : xy) {
      points.x_ml.push_back(x);
      points.y.push_back(g);
    }
    result.diagnostics.series.push_back(std::move(points));
    const double outer = v[s.used.front()];
    const double at_outer = (s.a + s.b * (outer - s.centre)) / scale;
    result.diagnostics.series.push_back({line_name, "mL", {outer, s.zero_ml}, {at_outer, 0.0}});
  };
  auto [final_before_side, final_after_side] = make_sides(split);
  add_series(final_before_side, before_fit, "gran_before", "gran_before_line");
  add_series(final_after_side, after_fit, "gran_after", "gran_after_line");
  DiagnosticSeries skipped{"skipped_points", signal_kind_name(curve.kind()), {}, {}};
  for (const SideFit* s : {&before_fit, &after_fit}) {
    for (std::size_t i : s->skipped) {
      skipped.x_ml.push_back(v[i]);
      skipped.y.push_back(curve.signal()[i]);
    }
  }
  if (!skipped.x_ml.empty())
    result.diagnostics.series.push_back(std::move(skipped));
  if (f.log_alpha) {
    DiagnosticSeries alpha{"log10_metal_side_reaction", "log10 alpha_M", {}, {}};
    for (std::size_t i : final_before_side.order) {
      alpha.x_ml.push_back(v[i]);
      alpha.y.push_back(log_alpha[i] / kLn10);
    }
    result.diagnostics.series.push_back(std::move(alpha));
  }
  for (const auto& [s, label] :
       {std::pair{&before_fit, "before"}, std::pair{&after_fit, "after"}}) {
    if (!s->ok)
      continue;
    result.diagnostics.markers.push_back(
        {std::string("zero ") + label, MarkerAxis::volume, s->zero_ml});
    result.diagnostics.markers.push_back(
        {std::string(label) + " range start", MarkerAxis::volume, v[s->used.front()]});
    result.diagnostics.markers.push_back(
        {std::string(label) + " range end", MarkerAxis::volume, v[s->used.back()]});
  }
  result.details = std::move(details);

  if (!combined.ok) {
    result.flags.push_back(QualityFlag::no_endpoint);
    if ((use_before && before_fit.used.size() < 3) || (use_after && after_fit.used.size() < 3))
      result.flags.push_back(QualityFlag::few_points_in_segment);
    return result;
  }

  Endpoint endpoint;
  endpoint.volume_ml = combined.volume_ml;
  double variance = combined.variance;
  double chi2 = combined.chi2;
  if (fit_slope && before_fit.ok && after_fit.ok && use_before && use_after) {
    // The slope moves both zeros together; its part of their difference is
    // not a disagreement.
    const double sr2 = sigma_r_of(slope) * sigma_r_of(slope);
    const double d = before_fit.zero_ml - after_fit.zero_ml;
    chi2 = d * d /
           (std::max(before_fit.residual_var, sr2) * before_fit.zero_variance_factor +
            std::max(after_fit.residual_var, sr2) * after_fit.zero_variance_factor +
            d_difference_d_slope * d_difference_d_slope * slope_variance);
  }
  if (chi2 > 1.0)
    variance *= chi2;  // Birge ratio for two values: sqrt(chi^2 / (2 - 1))
  variance += d_volume_d_slope * d_volume_d_slope * slope_variance;
  endpoint.uncertainty_ml = std::sqrt(variance);
  if (chi2 > 9.0)
    endpoint.flags.push_back(QualityFlag::sides_disagree);
  const std::vector<double>& signal = curve.signal();
  const auto right = static_cast<std::size_t>(std::clamp<std::ptrdiff_t>(
      std::upper_bound(v.begin(), v.end(), endpoint.volume_ml) - v.begin(), 1,
      static_cast<std::ptrdiff_t>(n - 1)));
  const double t = (endpoint.volume_ml - v[right - 1]) / (v[right] - v[right - 1]);
  endpoint.signal =
      signal[right - 1] + std::clamp(t, 0.0, 1.0) * (signal[right] - signal[right - 1]);
  endpoint.steepness = std::abs((signal[right] - signal[right - 1]) / (v[right] - v[right - 1]));
  const double sr2 = sigma_r_of(slope) * sigma_r_of(slope);
  for (const auto& [s, wanted] :
       {std::pair{&before_fit, use_before}, std::pair{&after_fit, use_after}}) {
    if (!wanted)
      continue;
    if (s->used.size() < static_cast<std::size_t>(options.min_points_per_side))
      endpoint.flags.push_back(QualityFlag::few_points_in_segment);
    // Scatter about the line beyond twice the noise: not a straight line.
    if (s->ok && s->residual_var > 4.0 * sr2 && sigma_e > 0.0 &&
        !has_flag(endpoint.flags, QualityFlag::poor_linearity))
      endpoint.flags.push_back(QualityFlag::poor_linearity);
  }
  if (fit_slope) {
    const double percent = 100.0 * std::abs(slope) / nernst;
    if (percent < 80.0 || percent > 105.0)
      endpoint.flags.push_back(QualityFlag::unusual_slope);
    if (slope_at_limit)
      endpoint.flags.push_back(QualityFlag::parameter_at_limit);
  }
  if (endpoint.volume_ml <= v.front() || endpoint.volume_ml >= v.back())
    endpoint.flags.push_back(QualityFlag::near_curve_end);
  result.diagnostics.markers.insert(result.diagnostics.markers.begin(),
                                    {"endpoint 1", MarkerAxis::volume, endpoint.volume_ml});
  result.endpoints.push_back(std::move(endpoint));
  return result;
}

}  // namespace veq::detection
