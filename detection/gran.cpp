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
  // Assigned one by one: cheaper than an initializer list, which copies.
  nlohmann::json j;
  j["slope_mv_per_decade"] = options.slope_mv_per_decade;
  j["sides"] = gran_sides_name(options.sides);
  j["correct_metal_fraction"] = options.correct_metal_fraction;
  j["acceptance_sigma"] = options.acceptance_sigma;
  j["min_points_per_side"] = options.min_points_per_side;
  if (options.sample)
    j["sample"] = chemistry::to_json(*options.sample);
  return j;
}

namespace {

veq::Error gran_option_error(const std::string& field, const std::string& what) {
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
    return gran_option_error("slope_mv_per_decade", "must be a finite number >= 0 (0 = fit)");
  }
  if (!std::isfinite(o.acceptance_sigma) || o.acceptance_sigma <= 0.0) {
    return gran_option_error("acceptance_sigma", "must be a finite number > 0");
  }
  if (o.min_points_per_side < 3)
    return gran_option_error("min_points_per_side", "must be >= 3");
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
        return gran_option_error(key, "must be a number");
      (key == "slope_mv_per_decade" ? o.slope_mv_per_decade : o.acceptance_sigma) =
          value.get<double>();
    } else if (key == "sides") {
      const auto sides = value.is_string() ? gran_sides_from_name(value.get<std::string>())
                                           : std::optional<GranSides>{};
      if (!sides)
        return gran_option_error(key, "must be \"both\", \"before\" or \"after\"");
      o.sides = *sides;
    } else if (key == "correct_metal_fraction") {
      if (!value.is_boolean())
        return gran_option_error(key, "must be true or false");
      o.correct_metal_fraction = value.get<bool>();
    } else if (key == "min_points_per_side") {
      if (!value.is_number_integer())
        return gran_option_error(key, "must be an integer");
      o.min_points_per_side = value.get<int>();
    } else if (key == "sample") {
      auto sample = fit_support::sample_from_option(value);
      if (!sample)
        return gran_option_error(key, sample.error().message);
      o.sample = std::move(*sample);
    } else {
      return gran_option_error(
          key,
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
    // One division: its latency, not the arithmetic, bounds the growing of
    // a line point by point.
    inverse_det_ = 1.0 / det_;
    a_ = (sp_ * sqq_ - sq_ * spq_) * inverse_det_;
    b_ = (spp_ * sq_ - spq_ * sp_) * inverse_det_;
    return true;
  }
  double a() const { return a_; }
  double b() const { return b_; }
  // Sum of squared residuals at the solution.
  double sse() const { return m_ - a_ * sp_ - b_ * sq_; }
  double residual(double v, double h) const { return 1.0 - (a_ + b_ * (v - centre_)) * h; }
  // Whether a point lies within `limit` of the line of the points in it,
  // the limit widened by the point's leverage: |r| <= limit sqrt(1 + lev).
  // Works on the normal equations' numerators, without solving them: the
  // latency of a division per point would otherwise bound the growing of a
  // line point by point. False when the equations are singular.
  bool within(double v, double h, double limit) const {
    const double det = spp_ * sqq_ - spq_ * spq_;
    if (!(det > 1e-300 * std::max(spp_ * sqq_, 1e-300)) || m_ < 2.0)
      return false;
    const double x = v - centre_;
    const double a_det = sp_ * sqq_ - sq_ * spq_, b_det = spp_ * sq_ - spq_ * sp_;
    const double r_det = det - (a_det + b_det * x) * h;  // residual times det
    const double limit_det = limit * det;
    if (std::abs(r_det) <= limit_det)
      return true;
    const double p = h, q = x * h;
    const double leverage_det = sqq_ * p * p - 2.0 * spq_ * p * q + spp_ * q * q;
    return r_det * r_det <= limit_det * limit * (det + leverage_det);
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
  double det_ = 0.0, inverse_det_ = 0.0, a_ = 0.0, b_ = 0.0;
};

// The points of one side, ordered from the outer end of the curve towards
// the break.
struct Side {
  bool before = true;
  std::vector<std::size_t> order;
};

struct SideFit {
  bool ok = false;
  std::vector<std::size_t> used;     // curve indices in the fit, outer end first
  std::vector<std::size_t> skipped;  // single points turned away (spikes)
  double zero_ml = 0.0;
  double zero_variance_factor = 0.0;
  double sse = 0.0;                       // sum of squared relative residuals
  double residual_var = 0.0;              // sse / (m - 2)
  double a = 0.0, b = 0.0, centre = 0.0;  // 1/h = a + b (V - centre) on the line
  double inner_ml = 0.0;                  // volume of the innermost point used
};

// The Gran functions as reciprocals h = 1/G at every point of the curve for
// one slope s (signal units per decade, signed), relative to the signal at
// the break (so that neither over- nor underflows):
//   before: G = (V0 + V) alpha_M 10^((E - Eref)/s),  after: G = 10^(-(E - Eref)/s).
// The regressions work on h (relative residuals 1 - G_line h).
struct GranFunctions {
  std::vector<double> z;         // ln(10) (E - Eref)
  std::vector<double> dilution;  // 1 / ((V0 + V) alpha_M): the before function's factor, inverted
  std::vector<double> h_before, h_after;
  // Counts the changes of h_before and h_after, so that a line fitted to
  // the same points of the same functions need not be fitted again.
  unsigned version = 0;

  // One exponential per point: h_after = 10^((E - Eref)/s), h_before =
  // dilution / h_after.
  void reciprocals(double slope) {
    ++version;
    const std::size_t n = z.size();
    h_before.resize(n);
    h_after.resize(n);
    const double inverse = 1.0 / slope;
    for (std::size_t i = 0; i < n; ++i) {
      const double after = std::exp(z[i] * inverse);
      h_after[i] = after;
      h_before[i] = dilution[i] / after;
    }
  }
  double reciprocal(std::size_t i, bool before, double slope) const {
    const double after = std::exp(z[i] / slope);
    return before ? dilution[i] / after : after;
  }
};

// Least squares over a fixed set of points, in one pass: centred at the
// innermost point (the heaviest points lie next to it, so the normal
// equations stay well conditioned), the residual sum of squares from the
// sums (m - a sum p - b sum q at the solution; it keeps ten digits or more
// at the noise levels met, and is only compared with the noise).
SideFit regress(const std::vector<double>& v, const std::vector<double>& h,
                std::vector<std::size_t> used_points) {
  SideFit fit;
  fit.used = std::move(used_points);
  const std::vector<std::size_t>& used = fit.used;
  if (used.size() < 3)
    return fit;
  RelativeLine line(v[used.back()]);
  for (std::size_t i : used)
    line.add(v[i], h[i]);
  if (!line.solve() || !(line.b() != 0.0))
    return fit;
  const double sse = std::max(0.0, line.sse());
  fit.ok = std::isfinite(line.zero_ml());
  fit.zero_ml = line.zero_ml();
  fit.zero_variance_factor = line.zero_variance_factor();
  fit.sse = sse;
  fit.residual_var = sse / static_cast<double>(used.size() - 2);
  fit.a = line.a();
  fit.b = line.b();
  fit.centre = line.centre();
  fit.inner_ml = v[used.back()];
  return fit;
}

// Chooses the straight part of one side and fits it (see find_endpoints_by_gran).
SideFit select_and_fit(const std::vector<double>& v, const std::vector<double>& h, const Side& side,
                       double sigma_r, double acceptance) {
  const std::size_t count = side.order.size();
  if (count < 3)
    return {};
  const auto& order = side.order;
  RelativeLine line(v[order.back()]);
  std::vector<std::size_t> used;  // positions in order
  used.reserve(count);
  std::vector<std::size_t> skipped;
  const std::size_t seed =
      std::clamp<std::size_t>((count + 1) / 2, std::min<std::size_t>(3, count), count);
  for (std::size_t k = 0; k < seed; ++k) {
    line.add(v[order[k]], h[order[k]]);
    used.push_back(k);
  }
  if (!line.solve())
    return {};
  // Spikes in the seed: drop the worst point while it lies beyond five noise
  // standard deviations (a Gaussian reading does so once in 3.5 million).
  for (std::size_t round = 0; round < seed / 4 && used.size() > 3; ++round) {
    std::size_t worst = 0;
    double worst_r = 0.0;
    for (std::size_t u = 0; u < used.size(); ++u) {
      const std::size_t i = order[used[u]];
      const double r = std::abs(line.residual(v[i], h[i]));
      if (r > worst_r) {
        worst_r = r;
        worst = u;
      }
    }
    if (worst_r <= 5.0 * sigma_r)
      break;
    line.remove(v[order[used[worst]]], h[order[used[worst]]]);
    skipped.push_back(used[worst]);
    used.erase(used.begin() + static_cast<std::ptrdiff_t>(worst));
    if (!line.solve())
      return {};
  }
  // Grow towards the break. The loop calls no function (the positions go
  // into room made beforehand, the misses wait in two locals), so that the
  // line's sums stay in registers: a call would spill them to memory at
  // every point, and the chain from one point's sums to the next would run
  // through a store and a load each time.
  {
    std::size_t used_count = used.size(), skipped_count = skipped.size();
    used.resize(count);
    skipped.resize(count);  // every position is used, skipped or neither
    std::size_t missed[2] = {0, 0};
    int misses = 0;
    const double limit = acceptance * sigma_r;
    RelativeLine grow = line;
    for (std::size_t k = seed; k < count; ++k) {
      const double x = v[order[k]];
      const double hk = h[order[k]];
      if (grow.within(x, hk, limit)) {
        for (int j = 0; j < misses; ++j)
          skipped[skipped_count++] = missed[j];
        misses = 0;
        grow.add(x, hk);
        used[used_count++] = k;
      } else {
        // Three misses in a row end the line (noise alone does that about
        // once in 50 million points); fewer are single bad readings, skipped.
        if (misses == 2)
          break;
        missed[misses++] = k;
      }
    }
    line = grow;
    used.resize(used_count);
    skipped.resize(skipped_count);
  }
  if (!line.solve())
    return {};
  // The curved region bends away gradually, so single points pass while
  // together they pull the line: drop inner points while the mean residual
  // of the innermost few departs from zero by more than `acceptance` of its
  // standard error.
  while (used.size() > 4) {
    const std::size_t run = std::max<std::size_t>(3, used.size() / 10);
    double mean = 0.0;
    for (std::size_t u = used.size() - run; u < used.size(); ++u)
      mean += line.residual(v[order[used[u]]], h[order[used[u]]]);
    mean /= static_cast<double>(run);
    if (std::abs(mean) <= acceptance * sigma_r / std::sqrt(static_cast<double>(run)))
      break;
    line.remove(v[order[used.back()]], h[order[used.back()]]);
    used.pop_back();
    if (!line.solve())
      return {};
  }
  for (std::size_t& u : used)
    u = order[u];
  SideFit fit = regress(v, h, std::move(used));
  for (std::size_t& s : skipped)
    s = order[s];
  std::sort(skipped.begin(), skipped.end());
  fit.skipped = std::move(skipped);
  return fit;
}

// One Gauss-Newton step for the electrode slope s, with both lines
// re-fitted at s (variable projection: a, b are solved exactly, so the step
// uses the Schur complement of their block). Residuals in signal units,
// rho = (s / ln 10) (1 - (a + b x) h(s)): with h_after = exp(z/s) and
// h_before = dilution exp(-z/s), dh/ds = -/+ h z / s^2.
struct SlopeStep {
  double step = 0.0;   // change of s
  double schur = 0.0;  // J^T J for s with the lines projected out
  double q = 0.0;      // sum of squared residuals, signal units
};

SlopeStep slope_step(const std::vector<double>& v, const GranFunctions& f, double s,
                     const std::vector<std::size_t>& before_used,
                     const std::vector<std::size_t>& after_used, std::vector<double>& h,
                     std::vector<double>& dh) {
  SlopeStep out;
  double gradient = 0.0;
  const double k = s / kLn10;
  for (const auto& [used, before] :
       {std::pair{&before_used, true}, std::pair{&after_used, false}}) {
    if (used->size() < 3)
      continue;
    // h and dh/ds at s, and the line through them.
    const double centre = v[used->back()];
    RelativeLine line(centre);
    h.resize(used->size());
    dh.resize(used->size());
    for (std::size_t u = 0; u < used->size(); ++u) {
      const std::size_t i = (*used)[u];
      h[u] = f.reciprocal(i, before, s);
      dh[u] = (before ? 1.0 : -1.0) * h[u] * f.z[i] / (s * s);
      line.add(v[i], h[u]);
    }
    if (!line.solve())
      continue;
    double aa = 0.0, ab = 0.0, bb = 0.0, ca = 0.0, cb = 0.0, d = 0.0, g = 0.0;
    for (std::size_t u = 0; u < used->size(); ++u) {
      const double x = v[(*used)[u]] - centre;
      const double fitted = line.a() + line.b() * x;
      const double r = 1.0 - fitted * h[u];
      const double rho = k * r;
      const double wa = -k * h[u], wb = -k * x * h[u];
      const double ws = r / kLn10 - k * fitted * dh[u];
      aa += wa * wa;
      ab += wa * wb;
      bb += wb * wb;
      ca += wa * ws;
      cb += wb * ws;
      d += ws * ws;
      g -= ws * rho;
      out.q += rho * rho;
    }
    // c^T A^-1 c for the 2x2 block A = [[aa, ab], [ab, bb]].
    const double det = aa * bb - ab * ab;
    if (det > 0.0)
      d -= (bb * ca * ca - 2.0 * ab * ca * cb + aa * cb * cb) / det;
    out.schur += d;
    gradient += g;
  }
  if (out.schur > 0.0)
    out.step = gradient / out.schur;
  return out;
}

struct Combined {
  bool ok = false;
  double volume_ml = 0.0;
  double variance = 0.0;  // from the regressions (slope fixed)
  double chi2 = 0.0;      // of the two zeros against each other
};

// Variance of a line's zero: from the regression, plus an allowance for
// the incomplete reaction, which may still bend the innermost point kept by
// up to kIncompleteFraction of the noise; the points next to it bend the
// same way, so the line tilts and its zero moves by up to about twice that
// share of the distance from the innermost point to the zero (calibrated on
// the weak-break trial scenarios). Small for a sharp break, where the line
// reaches close to its zero; it dominates for a weak one.
double zero_variance(const SideFit& s, double sigma_r2) {
  const double bend = 2.0 * kIncompleteFraction * std::sqrt(sigma_r2) * (s.zero_ml - s.inner_ml);
  return std::max(s.residual_var, sigma_r2) * s.zero_variance_factor + bend * bend;
}

Combined combine(const SideFit* before, const SideFit* after, double sigma_r2) {
  Combined c;
  const bool b_ok = before && before->ok;
  const bool a_ok = after && after->ok;
  if (b_ok && a_ok) {
    const double u1 = zero_variance(*before, sigma_r2), u2 = zero_variance(*after, sigma_r2);
    const double w1 = 1.0 / u1, w2 = 1.0 / u2;
    c.volume_ml = (w1 * before->zero_ml + w2 * after->zero_ml) / (w1 + w2);
    c.variance = 1.0 / (w1 + w2);
    const double d = before->zero_ml - after->zero_ml;
    c.chi2 = d * d / (u1 + u2);
    c.ok = true;
  } else if (b_ok || a_ok) {
    const SideFit& s = b_ok ? *before : *after;
    c.volume_ml = s.zero_ml;
    c.variance = zero_variance(s, sigma_r2);
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
  // The signal as the slope times log10 of the metal concentration: E for a
  // potential, -pM for pM (slope 1).
  std::vector<double> negated;
  if (!potential) {
    negated.resize(n);
    for (std::size_t i = 0; i < n; ++i)
      negated[i] = -curve.signal()[i];
  }
  const std::vector<double>& e = potential ? curve.signal() : negated;
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

  const double sigma_e = fit_support::noise_sd_median(v, e);
  const auto steepest = fit_support::steepest_fall(v, e, sign);
  if (!steepest) {
    result.flags.push_back(QualityFlag::no_endpoint);
    return result;
  }
  double split = v[*steepest];
  const double reference = e[*steepest];

  // Relative noise of G: ln(10) sigma_E / |S|, with a floor for noise-free
  // curves (computed ones) so that the acceptance tests stay finite.
  auto sigma_r_of = [&](double s) { return std::max(kLn10 * sigma_e / std::abs(s), 1e-7); };

  GranFunctions f;
  f.z.resize(n);
  f.dilution.resize(n);
  for (std::size_t i = 0; i < n; ++i) {
    f.z[i] = kLn10 * (e[i] - reference);
    f.dilution[i] = sample_volume_ml > 0.0 ? 1.0 / (sample_volume_ml + v[i]) : 1.0;
  }
  std::vector<double> log_alpha;
  double alpha_for_ml = 0.0;  // equivalence volume the fractions were computed for
  auto set_alpha = [&](const std::vector<double>& la) {
    ++f.version;
    for (std::size_t i = 0; i < n; ++i)
      f.dilution[i] =
          (sample_volume_ml > 0.0 ? 1.0 / (sample_volume_ml + v[i]) : 1.0) * std::exp(-la[i]);
  };
  f.reciprocals(slope);

  // The two sides' points for a split volume, into reused vectors.
  Side before_side{true, {}}, after_side{false, {}};
  before_side.order.reserve(n);
  after_side.order.reserve(n);
  auto make_sides = [&](double at) {
    // Volumes increase: the sides are the points below and above `at`.
    const auto first_after =
        static_cast<std::size_t>(std::upper_bound(v.begin(), v.end(), at) - v.begin());
    const auto end_before =
        static_cast<std::size_t>(std::lower_bound(v.begin(), v.end(), at) - v.begin());
    before_side.order.resize(end_before);
    for (std::size_t i = 0; i < end_before; ++i)
      before_side.order[i] = i;
    after_side.order.resize(n - first_after);
    for (std::size_t k = 0; k < n - first_after; ++k)
      after_side.order[k] = n - 1 - k;
  };
  const bool use_before = options.sides != GranSides::after;
  const bool use_after = options.sides != GranSides::before;

  SideFit before_fit, after_fit;
  Combined combined;
  double slope_variance = 0.0, d_volume_d_slope = 0.0, d_difference_d_slope = 0.0;
  bool slope_at_limit = false;
  const double slope_lo = 0.5 * nernst, slope_hi = 1.25 * nernst;
  double previous_b1 = 0.0, previous_b2 = 0.0, previous_volume = 0.0;
  double slope_schur = 0.0, slope_q = 0.0;  // of the slope's last Gauss-Newton step
  bool slope_fitted_here = false;
  const double starting_slope = slope;
  const auto min_points = static_cast<std::size_t>(options.min_points_per_side);
  std::vector<double> scratch_h, scratch_dh;  // for the slope's steps
  // The metal fraction for an equivalence volume (0: the sample's nominal
  // one); true when it was (re)computed.
  auto refresh_alpha = [&](double target) -> veq::Result<bool> {
    if (!library_needed)
      return false;
    const bool stale =
        log_alpha.empty() || (target > 0.0 && std::abs(target - alpha_for_ml) > 0.01 * target);
    if (!stale)
      return false;
    auto la = log_metal_fraction(curve, *chem, library, target);
    if (!la)
      return la.error();
    log_alpha = std::move(*la);
    alpha_for_ml = target > 0.0 ? target
                                : chem->sample.metals[chem->signal_metal].conc_mol_per_l *
                                      chem->sample_volume_ml / chem->sample.titrant.conc_mol_per_l;
    set_alpha(log_alpha);
    f.reciprocals(slope);
    return true;
  };
  if (auto first = refresh_alpha(0.0); !first)
    return first.error();
  // First estimate of both lines from the outer half of each side (far
  // from the break, no selection needed): the slopes and the zero that the
  // exclusion of the incomplete region below starts from.
  {
    make_sides(split);
    auto outer = [&](const Side& side, const std::vector<double>& h) {
      std::vector<std::size_t> half(
          side.order.begin(),
          side.order.begin() + static_cast<std::ptrdiff_t>((side.order.size() + 1) / 2));
      return regress(v, h, std::move(half));
    };
    const SideFit b = outer(before_side, f.h_before), a = outer(after_side, f.h_after);
    const Combined c = combine(&b, &a, sigma_r_of(slope) * sigma_r_of(slope));
    if (c.ok && b.ok && a.ok && b.b < 0.0 && a.b > 0.0) {
      previous_b1 = -b.b;
      previous_b2 = a.b;
      previous_volume = c.volume_ml;
    }
  }
  std::vector<std::size_t> last_before, last_after;
  double slope_moved = 0.0;  // by the last pass's slope fit
  // What each side's line was last fitted to: the same points of the same
  // functions at the same noise give the same line (select_and_fit is a
  // function of these alone), so it is not fitted again.
  struct FittedFrom {
    bool valid = false;
    unsigned version = 0;
    double sigma_r = 0.0;
    std::vector<std::size_t> order;
  };
  FittedFrom before_fitted, after_fitted;
  auto fit_side = [&](SideFit& fit, const Side& side, const std::vector<double>& h, double sr,
                      FittedFrom& from) {
    if (from.valid && from.version == f.version && from.sigma_r == sr && from.order == side.order)
      return;
    fit = select_and_fit(v, h, side, sr, options.acceptance_sigma);
    from.valid = true;
    from.version = f.version;
    from.sigma_r = sr;
    from.order = side.order;
  };
  for (int pass = 0; pass < 5; ++pass) {
    auto refreshed = refresh_alpha(combined.ok ? combined.volume_ml : 0.0);
    if (!refreshed)
      return refreshed.error();
    const bool alpha_changed = *refreshed;
    make_sides(split);
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
      // The products associate from the left, so these leading factors
      // taken once give the values of the whole expressions, and a metal
      // fraction of exactly 1 (no ligand) needs no multiplication.
      const double after_scale = limit * previous_b1 * previous_b2;
      const double before_scale = after_scale * ve;
      const bool with_alpha = !log_alpha.empty();
      std::size_t kept = 0;
      for (std::size_t i : before_side.order) {
        const double d = ve - v[i];
        double bend = v[i] * (sample_volume_ml + v[i]);
        if (with_alpha)
          bend *= std::exp(log_alpha[i]);
        if (!(bend > before_scale * d * d))
          before_side.order[kept++] = i;
      }
      before_side.order.resize(kept);
      kept = 0;
      for (std::size_t i : after_side.order) {
        const double d = v[i] - ve;
        double bend = sample_volume_ml + v[i];
        if (with_alpha)
          bend *= std::exp(log_alpha[i]);
        if (!(bend > after_scale * d * d))
          after_side.order[kept++] = i;
      }
      after_side.order.resize(kept);
    }
    // Settled when the points on offer are those of the last pass, with the
    // same slope and metal fractions: the selection would repeat itself.
    if (pass > 0 && !alpha_changed && before_side.order == last_before &&
        after_side.order == last_after && slope_moved <= 1e-4 * nernst)
      break;
    last_before = before_side.order;
    last_after = after_side.order;
    auto fit_sides = [&]() {
      const double sr = sigma_r_of(slope);
      fit_side(before_fit, before_side, f.h_before, sr, before_fitted);
      fit_side(after_fit, after_side, f.h_after, sr, after_fitted);
    };
    fit_sides();
    // The slope is fitted only while both lines stand: one line alone pins
    // it down by its curvature only, too weakly to be worth its uncertainty
    // (with a weak break the incomplete reaction can leave one side no
    // points; the slope then stays at its starting value).
    slope_fitted_here = fit_slope && before_fit.ok && after_fit.ok &&
                        before_fit.used.size() >= min_points && after_fit.used.size() >= min_points;
    if (slope_fitted_here) {
      // Slope that makes both functions straightest: least squares in signal
      // units over the ranges just chosen, by Gauss-Newton steps (clamped to
      // 50-125 % of the Nernst slope; a step that does not lower the sum of
      // squares is halved).
      const double start = slope;
      SlopeStep step =
          slope_step(v, f, slope, before_fit.used, after_fit.used, scratch_h, scratch_dh);
      for (int iteration = 0; iteration < 12 && step.schur > 0.0; ++iteration) {
        double next = sign * std::clamp(sign * (slope + step.step), slope_lo, slope_hi);
        SlopeStep trial =
            slope_step(v, f, next, before_fit.used, after_fit.used, scratch_h, scratch_dh);
        for (int halving = 0; halving < 20 && trial.q > step.q; ++halving) {
          next = 0.5 * (slope + next);
          trial = slope_step(v, f, next, before_fit.used, after_fit.used, scratch_h, scratch_dh);
        }
        const double moved = std::abs(next - slope);
        slope = next;
        step = trial;
        if (moved <= 1e-6 * nernst)
          break;
      }
      slope_schur = step.schur;
      slope_q = step.q;
      slope_at_limit = std::abs(slope) < slope_lo * 1.001 || std::abs(slope) > slope_hi * 0.999;
      slope_moved = std::abs(slope - start);
      if (slope_moved > 1e-6 * nernst) {
        f.reciprocals(slope);
        fit_sides();
      }
    }
    if (fit_slope && !(before_fit.ok && after_fit.ok && before_fit.used.size() >= min_points &&
                       after_fit.used.size() >= min_points)) {
      // A side lost its points: back to the starting slope.
      slope_fitted_here = false;
      if (slope != starting_slope) {
        slope = starting_slope;
        f.reciprocals(slope);
        fit_sides();
      }
    }
    combined = combine(use_before ? &before_fit : nullptr, use_after ? &after_fit : nullptr,
                       sigma_r_of(slope) * sigma_r_of(slope));
    if (!combined.ok)
      break;
    if (before_fit.ok && before_fit.b < 0.0 && after_fit.ok && after_fit.b > 0.0) {
      previous_b1 = -before_fit.b;
      previous_b2 = after_fit.b;
    }
    previous_volume = combined.volume_ml;
    split = std::clamp(combined.volume_ml, v.front(), v.back());
  }

  // The slope's own uncertainty, propagated (ranges fixed).
  if (combined.ok && slope_fitted_here) {
    const double sr2 = sigma_r_of(slope) * sigma_r_of(slope);
    std::vector<double> hb(n), ha(n);
    auto at = [&](double s) {
      for (std::size_t i : before_fit.used)
        hb[i] = f.reciprocal(i, true, s);
      for (std::size_t i : after_fit.used)
        ha[i] = f.reciprocal(i, false, s);
      SideFit bf = before_fit.ok ? regress(v, hb, before_fit.used) : SideFit{};
      SideFit af = after_fit.ok ? regress(v, ha, after_fit.used) : SideFit{};
      double q = (bf.ok ? bf.sse : 0.0) + (af.ok ? af.sse : 0.0);
      q *= (s / kLn10) * (s / kLn10);
      const Combined c =
          combine(bf.ok && use_before ? &bf : nullptr, af.ok && use_after ? &af : nullptr, sr2);
      const double difference = bf.ok && af.ok ? bf.zero_ml - af.zero_ml : 0.0;
      return std::array<double, 3>{q, c.volume_ml, difference};
    };
    const double h = 0.01 * std::abs(slope);
    const auto up = at(slope + h);
    const auto down = at(slope - h);
    const double points = static_cast<double>((before_fit.ok ? before_fit.used.size() : 0) +
                                              (after_fit.ok ? after_fit.used.size() : 0));
    const double dof = std::max(1.0, points - 5.0);
    const double signal_var = std::max(slope_q / dof, sigma_e * sigma_e);
    // Gauss-Newton: var(S) = s^2 / (J^T J) with the lines projected out.
    if (slope_schur > 0.0)
      slope_variance = signal_var / slope_schur;
    d_volume_d_slope = (up[1] - down[1]) / (2.0 * h);
    d_difference_d_slope = (up[2] - down[2]) / (2.0 * h);
  }

  const double sr2 = sigma_r_of(slope) * sigma_r_of(slope);
  nlohmann::json& details = result.details;
  if (potential) {
    details["slope_mv_per_decade"] = slope;
    details["nernst_slope_mv_per_decade"] = nernst;
  }
  details["slope_fitted"] = slope_fitted_here;
  if (slope_fitted_here) {
    details["slope_uncertainty_mv_per_decade"] = std::sqrt(slope_variance);
    details["slope_percent_of_nernst"] = 100.0 * std::abs(slope) / nernst;
  }
  details["noise_sd"] = sigma_e;
  details["metal_fraction_corrected"] = library_needed;
  auto side_details = [&](const SideFit& s, nlohmann::json& j) {
    if (!s.ok || s.used.empty()) {
      j = nullptr;
      return;
    }
    // The line in the function's own units, G = intercept + slope_per_ml V:
    // before, G = (V0 + V) alpha_M 10^((E - Eref)/S) (for pM curves
    // (V0 + V) 10^-(pM - pM_ref), so that 10^-pM_ref times the slope is minus
    // the titrant concentration); after, G = 10^(-(E - Eref)/S).
    const double v_first = v[s.used.front()], v_last = v[s.used.back()];
    j["zero_ml"] = s.zero_ml;
    j["uncertainty_ml"] = std::sqrt(zero_variance(s, sr2));
    j["range_ml"] = {std::min(v_first, v_last), std::max(v_first, v_last)};
    j["points"] = s.used.size();
    j["skipped_points"] = s.skipped.size();
    j["line_slope_per_ml"] = s.b;
    j["line_intercept"] = s.a - s.b * s.centre;
  };
  // Both lines are fitted whichever gives the endpoint: each one's slope
  // tells the other where the incomplete reaction begins.
  side_details(before_fit, details["before"]);
  side_details(after_fit, details["after"]);
  details["sides_used"] = gran_sides_name(options.sides);
  details["reference_signal"] = potential ? reference : -reference;

  // Diagnostics: each function scaled to mL of titrant (its line then reads
  // Ve - V before and V - Ve after), the fitted lines, the points turned
  // away, and the metal fraction used.
  make_sides(split);
  // At most five series and seven markers: room for them at once.
  result.diagnostics.series.reserve(6);
  result.diagnostics.markers.reserve(7);
  const Side& final_before_side = before_side;
  const Side& final_after_side = after_side;
  auto add_series = [&](const Side& side, const SideFit& s, const std::vector<double>& h,
                        const char* name, const char* line_name) {
    if (!s.ok)
      return;
    const double scale = std::abs(s.b);
    // In increasing volume: the after side's order runs backwards.
    const std::size_t count = side.order.size();
    DiagnosticSeries points{name, "mL", std::vector<double>(count), std::vector<double>(count)};
    for (std::size_t k = 0; k < count; ++k) {
      const std::size_t i = side.order[k];
      const std::size_t at = side.before ? k : count - 1 - k;
      points.x_ml[at] = v[i];
      points.y[at] = 1.0 / (h[i] * scale);
    }
    result.diagnostics.series.push_back(std::move(points));
    const double outer = v[s.used.front()];
    const double at_outer = (s.a + s.b * (outer - s.centre)) / scale;
    result.diagnostics.series.push_back({line_name, "mL", {outer, s.zero_ml}, {at_outer, 0.0}});
  };
  add_series(final_before_side, before_fit, f.h_before, "gran_before", "gran_before_line");
  add_series(final_after_side, after_fit, f.h_after, "gran_after", "gran_after_line");
  if (!before_fit.skipped.empty() || !after_fit.skipped.empty()) {
    DiagnosticSeries skipped{"skipped_points", signal_kind_name(curve.kind()), {}, {}};
    for (const SideFit* s : {&before_fit, &after_fit}) {
      for (std::size_t i : s->skipped) {
        skipped.x_ml.push_back(v[i]);
        skipped.y.push_back(curve.signal()[i]);
      }
    }
    result.diagnostics.series.push_back(std::move(skipped));
  }
  if (!log_alpha.empty()) {
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
  if (slope_fitted_here && use_before && use_after) {
    // The slope moves both zeros together; its part of their difference is
    // not a disagreement.
    const double d = before_fit.zero_ml - after_fit.zero_ml;
    chi2 = d * d /
           (zero_variance(before_fit, sr2) + zero_variance(after_fit, sr2) +
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
  if (slope_fitted_here) {
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
