#include "detection/segments.hpp"

#include <algorithm>
#include <cmath>
#include <stdexcept>
#include <string>

#include "detection/local_fit.hpp"

namespace veq::detection {

nlohmann::json to_json(const SegmentsOptions& options) {
  return {{"dilution_correction", options.dilution_correction},
          {"min_points_per_segment", options.min_points_per_segment},
          {"acceptance_sigma", options.acceptance_sigma},
          {"seed_fraction", options.seed_fraction}};
}

namespace {

veq::Error segments_option_error(const std::string& field, const std::string& what) {
  return veq::make_error(veq::ErrorKind::invalid_input, "segments option '" + field + "': " + what);
}

}  // namespace

veq::Result<void> validate(const SegmentsOptions& o) {
  if (o.min_points_per_segment < 2) {
    return segments_option_error("min_points_per_segment", "must be >= 2");
  }
  if (!std::isfinite(o.acceptance_sigma) || o.acceptance_sigma <= 0.0) {
    return segments_option_error("acceptance_sigma", "must be a finite number > 0");
  }
  if (!(o.seed_fraction > 0.0 && o.seed_fraction <= 1.0)) {
    return segments_option_error("seed_fraction", "must lie in (0, 1]");
  }
  return {};
}

veq::Result<SegmentsOptions> segments_options_from_json(const nlohmann::json& json) {
  if (!json.is_object()) {
    return veq::make_error(veq::ErrorKind::invalid_input, "segments options must be a JSON object");
  }
  SegmentsOptions o;
  for (const auto& [key, value] : json.items()) {
    if (key == "dilution_correction") {
      if (!value.is_boolean())
        return segments_option_error(key, "must be true or false");
      o.dilution_correction = value.get<bool>();
    } else if (key == "min_points_per_segment") {
      if (!value.is_number_integer())
        return segments_option_error(key, "must be an integer");
      o.min_points_per_segment = value.get<int>();
    } else if (key == "acceptance_sigma" || key == "seed_fraction") {
      if (!value.is_number())
        return segments_option_error(key, "must be a number");
      (key == "acceptance_sigma" ? o.acceptance_sigma : o.seed_fraction) = value.get<double>();
    } else {
      return segments_option_error(
          key,
          "unknown option; known: dilution_correction, min_points_per_segment, "
          "acceptance_sigma, seed_fraction");
    }
  }
  if (auto ok = validate(o); !ok)
    return ok.error();
  return o;
}

namespace {

// Running least-squares line through points added one at a time. Sums are
// taken about a fixed origin near the data to avoid cancellation.
class LineFit {
 public:
  explicit LineFit(double origin = 0.0) : origin_(origin) {}
  void add(double x, double y) {
    x -= origin_;
    n_ += 1.0;
    sx_ += x;
    sy_ += y;
    sxx_ += x * x;
    sxy_ += x * y;
    syy_ += y * y;
  }
  void remove(double x, double y) {
    x -= origin_;
    n_ -= 1.0;
    sx_ -= x;
    sy_ -= y;
    sxx_ -= x * x;
    sxy_ -= x * y;
    syy_ -= y * y;
  }
  double count() const { return n_; }
  double mean_x() const { return origin_ + sx_ / n_; }
  double sxx() const { return sxx_ - sx_ * sx_ / n_; }
  double slope() const { return (sxy_ - sx_ * sy_ / n_) / sxx(); }
  double value_at(double x) const { return sy_ / n_ + slope() * (x - mean_x()); }
  double sse() const {
    const double syy = syy_ - sy_ * sy_ / n_;
    const double sxy = sxy_ - sx_ * sy_ / n_;
    return std::max(0.0, syy - sxy * sxy / sxx());
  }
  // Variance of the fitted line's value at x, per unit noise variance.
  double value_variance_factor(double x) const {
    const double dx = x - mean_x();
    return 1.0 / n_ + dx * dx / sxx();
  }

 private:
  double origin_ = 0.0;
  double n_ = 0.0, sx_ = 0.0, sy_ = 0.0, sxx_ = 0.0, sxy_ = 0.0, syy_ = 0.0;
};

struct Segment {
  LineFit fit;
  std::size_t first = 0;  // outer and inner index of the points used
  std::size_t last = 0;
  std::vector<std::size_t> used;  // indices in the fit, from the outer end inwards
};

// Grows a segment from the outer end of its side towards the break.
// `order` lists the side's point indices from the outer end inwards.
Segment grow(const std::vector<double>& x, const std::vector<double>& y,
             const std::vector<std::size_t>& order, double sigma, const SegmentsOptions& o) {
  Segment s{LineFit(x[order.front()]), order.front(), order.front(), {}};
  const std::size_t seed = std::clamp<std::size_t>(
      static_cast<std::size_t>(std::ceil(o.seed_fraction * static_cast<double>(order.size()))), 2,
      order.size());
  for (std::size_t m = 0; m < seed; ++m) {
    s.fit.add(x[order[m]], y[order[m]]);
    s.used.push_back(order[m]);
  }
  int misses = 0;
  for (std::size_t m = seed; m < order.size(); ++m) {
    const std::size_t i = order[m];
    const double predicted_sd =
        sigma * std::sqrt(1.0 + (s.fit.count() > 2 ? s.fit.value_variance_factor(x[i]) : 1.0));
    if (std::abs(y[i] - s.fit.value_at(x[i])) <= o.acceptance_sigma * predicted_sd) {
      misses = 0;
      s.fit.add(x[i], y[i]);
      s.used.push_back(i);
    } else if (++misses >= 2) {
      break;
    }
  }
  // The curved region bends away from the line gradually, so single points
  // pass the test above while together they pull the line: drop inner points
  // while the mean residual of the innermost few departs from zero by more
  // than acceptance_sigma of its own standard error.
  while (s.used.size() > 4) {
    const std::size_t run = std::max<std::size_t>(3, s.used.size() / 10);
    double mean = 0.0;
    for (std::size_t m = s.used.size() - run; m < s.used.size(); ++m) {
      mean += y[s.used[m]] - s.fit.value_at(x[s.used[m]]);
    }
    mean /= static_cast<double>(run);
    if (std::abs(mean) <= o.acceptance_sigma * sigma / std::sqrt(static_cast<double>(run)))
      break;
    s.fit.remove(x[s.used.back()], y[s.used.back()]);
    s.used.pop_back();
  }
  s.last = s.used.back();
  return s;
}

// t statistic of the quadratic term of a least-squares parabola through the
// segment's points: a straight segment gives |t| below about 3 (Student t),
// a curved one far more. 0 when there are too few points to tell.
double curvature_t(const std::vector<double>& x, const std::vector<double>& y,
                   const std::vector<std::size_t>& used) {
  const std::size_t m = used.size();
  if (m < 5)
    return 0.0;
  double mean = 0.0;
  for (std::size_t i : used)
    mean += x[i];
  mean /= static_cast<double>(m);
  double s[5] = {}, t[3] = {};
  for (std::size_t i : used) {
    const double u = x[i] - mean;
    double p = 1.0;
    for (int k = 0; k < 5; ++k, p *= u) {
      s[k] += p;
      if (k < 3)
        t[k] += p * y[i];
    }
  }
  const double a[3][3] = {{s[0], s[1], s[2]}, {s[1], s[2], s[3]}, {s[2], s[3], s[4]}};
  const double det = a[0][0] * (a[1][1] * a[2][2] - a[1][2] * a[2][1]) -
                     a[0][1] * (a[1][0] * a[2][2] - a[1][2] * a[2][0]) +
                     a[0][2] * (a[1][0] * a[2][1] - a[1][1] * a[2][0]);
  if (!(std::abs(det) > 0.0))
    return 0.0;
  // Row 2 of the inverse (cofactors / det) gives the quadratic coefficient
  // and, through its diagonal element, its variance per unit noise variance.
  const double i20 = (a[1][0] * a[2][1] - a[1][1] * a[2][0]) / det;
  const double i21 = -(a[0][0] * a[2][1] - a[0][1] * a[2][0]) / det;
  const double i22 = (a[0][0] * a[1][1] - a[0][1] * a[1][0]) / det;
  const double c0 = (t[0] * (a[1][1] * a[2][2] - a[1][2] * a[2][1]) -
                     t[1] * (a[0][1] * a[2][2] - a[0][2] * a[2][1]) +
                     t[2] * (a[0][1] * a[1][2] - a[0][2] * a[1][1])) /
                    det;
  const double c2 = i20 * t[0] + i21 * t[1] + i22 * t[2];
  const double c1 = (t[1] - c0 * s[1] - c2 * s[3]) / s[2];
  double sse = 0.0;
  for (std::size_t i : used) {
    const double u = x[i] - mean;
    const double r = y[i] - (c0 + c1 * u + c2 * u * u);
    sse += r * r;
  }
  const double variance = sse / static_cast<double>(m - 3);
  if (!(variance > 0.0))
    return 0.0;
  return c2 / std::sqrt(variance * i22);
}

}  // namespace

Evaluation find_endpoints_by_segments(const Curve& curve, const SegmentsOptions& options) {
  if (auto ok = validate(options); !ok)
    throw std::invalid_argument(ok.error().message);
  Evaluation result;
  result.method = "segments";
  result.options = to_json(options);

  const bool photometric =
      curve.kind() == SignalKind::absorbance || curve.kind() == SignalKind::transmittance;
  const bool correct = options.dilution_correction && photometric && curve.sample_volume_ml() > 0.0;
  if (options.dilution_correction && photometric && !correct) {
    result.flags.push_back(QualityFlag::dilution_not_corrected);
  }

  // Working copy: absorbance (dilution-corrected) or the raw signal.
  std::vector<double> x, y;
  x.reserve(curve.size());
  y.reserve(curve.size());
  bool out_of_range = false;
  for (std::size_t i = 0; i < curve.size(); ++i) {
    const double v = curve.volume_ml()[i];
    double s = curve.signal()[i];
    if (curve.kind() == SignalKind::transmittance) {
      if (!(s > 0.0)) {
        out_of_range = true;
        continue;
      }
      s = -std::log10(s / 100.0);
    }
    if (correct)
      s *= (curve.sample_volume_ml() + v) / curve.sample_volume_ml();
    x.push_back(v);
    y.push_back(s);
  }
  if (out_of_range)
    result.flags.push_back(QualityFlag::signal_out_of_range);
  const std::string y_unit = photometric
                                 ? (correct ? "absorbance (dilution-corrected)" : "absorbance")
                                 : signal_kind_name(curve.kind());
  if (correct || curve.kind() == SignalKind::transmittance) {
    result.diagnostics.series.push_back({"fitted_signal", y_unit, x, y});
  }

  const std::size_t n = x.size();
  constexpr std::size_t min_side = 3;  // a line and a check of it
  if (n < 2 * min_side) {
    result.flags.push_back(QualityFlag::few_points_in_segment);
    result.flags.push_back(QualityFlag::no_endpoint);
    return result;
  }
  std::vector<double> scratch;
  const double scale = std::max(std::abs(*std::max_element(y.begin(), y.end())),
                                std::abs(*std::min_element(y.begin(), y.end())));
  const double sigma = std::max(local_fit::noise_sd(x, y, scratch), 1e-12 * std::max(scale, 1.0));

  // Two-phase regression over every split with at least three points a side.
  std::size_t split = min_side;
  {
    std::vector<LineFit> left(n + 1, LineFit(x.front()));
    for (std::size_t i = 0; i < n; ++i) {
      left[i + 1] = left[i];
      left[i + 1].add(x[i], y[i]);
    }
    LineFit right(x.back());
    double best = INFINITY;
    for (std::size_t s = n - 1; s >= min_side; --s) {
      right.add(x[s], y[s]);
      if (n - s < min_side)
        continue;
      const double total = left[s].sse() + right.sse();
      if (total < best) {
        best = total;
        split = s;
      }
    }
  }

  auto intersect = [](const LineFit& a, const LineFit& b, double fallback) {
    const double db = a.slope() - b.slope();
    if (db == 0.0 || !std::isfinite(db))
      return fallback;
    // a(x) = b(x): a(m) + sa (x - m) = b(m) + sb (x - m) around m = mean of a.
    const double m = a.mean_x();
    return m + (b.value_at(m) - a.value_at(m)) / db;
  };

  Segment left_segment, right_segment;
  double crossing = 0.5 * (x[split - 1] + x[split]);
  std::vector<std::size_t> order;
  for (int pass = 0; pass < 4; ++pass) {
    order.clear();
    for (std::size_t i = 0; i < split; ++i)
      order.push_back(i);
    left_segment = grow(x, y, order, sigma, options);
    order.clear();
    for (std::size_t i = n; i-- > split;)
      order.push_back(i);
    right_segment = grow(x, y, order, sigma, options);
    const double next = intersect(left_segment.fit, right_segment.fit, crossing);
    crossing = next;
    const auto next_split =
        static_cast<std::size_t>(std::upper_bound(x.begin(), x.end(), crossing) - x.begin());
    const std::size_t clamped = std::clamp(next_split, min_side, n - min_side);
    if (clamped == split)
      break;
    split = clamped;
  }

  const LineFit& a = left_segment.fit;
  const LineFit& b = right_segment.fit;
  const double slope_change = a.slope() - b.slope();
  const bool inside = crossing >= x.front() && crossing <= x.back();
  if (a.count() < 3 || b.count() < 3 || !std::isfinite(crossing) || !inside) {
    if (a.count() < 3 || b.count() < 3)
      result.flags.push_back(QualityFlag::few_points_in_segment);
    result.flags.push_back(QualityFlag::no_endpoint);
    return result;
  }

  const double dof = a.count() + b.count() - 4.0;
  const double residual_variance = dof > 0.0 ? (a.sse() + b.sse()) / dof : sigma * sigma;
  Endpoint endpoint;
  endpoint.volume_ml = crossing;
  endpoint.uncertainty_ml = std::sqrt(residual_variance * (a.value_variance_factor(crossing) +
                                                           b.value_variance_factor(crossing))) /
                            std::abs(slope_change);
  endpoint.steepness = std::abs(slope_change);
  double signal = a.value_at(crossing);
  if (correct)
    signal *= curve.sample_volume_ml() / (curve.sample_volume_ml() + crossing);
  if (curve.kind() == SignalKind::transmittance)
    signal = 100.0 * std::pow(10.0, -signal);
  endpoint.signal = signal;

  const auto min_points = static_cast<double>(options.min_points_per_segment);
  if (a.count() < min_points || b.count() < min_points) {
    endpoint.flags.push_back(QualityFlag::few_points_in_segment);
  }
  // A segment whose points scatter well beyond the point-to-point noise, or
  // that a parabola fits significantly better, is a curve, not a line (factor
  // 2 on the scatter: exceeded by a true line only about once in a thousand
  // for 10 points; |t| > 4 on the curvature: about once in a thousand too).
  for (const Segment* seg : {&left_segment, &right_segment}) {
    const LineFit& f = seg->fit;
    if ((f.count() > 2.0 && std::sqrt(f.sse() / (f.count() - 2.0)) > 2.0 * sigma) ||
        std::abs(curvature_t(x, y, seg->used)) > 4.0) {
      endpoint.flags.push_back(QualityFlag::poor_linearity);
      break;
    }
  }
  // Lines that differ in slope by less than a fifth of the steeper one meet at
  // a shallow angle: a small error in either moves the intersection far.
  if (std::abs(slope_change) < 0.2 * std::max(std::abs(a.slope()), std::abs(b.slope()))) {
    endpoint.flags.push_back(QualityFlag::weak_angle);
  }
  result.endpoints.push_back(endpoint);

  // Diagnostics: both lines from their outer points to the intersection, the
  // points each segment used, and the points left out.
  auto line = [&](const char* name, const LineFit& f, double from) {
    result.diagnostics.series.push_back(
        {name, y_unit, {from, crossing}, {f.value_at(from), f.value_at(crossing)}});
  };
  line("left_segment", a, x[left_segment.first]);
  line("right_segment", b, x[right_segment.first]);
  DiagnosticSeries excluded{"excluded_points", y_unit, {}, {}};
  std::vector<bool> used(n, false);
  for (std::size_t i : left_segment.used)
    used[i] = true;
  for (std::size_t i : right_segment.used)
    used[i] = true;
  for (std::size_t i = 0; i < n; ++i) {
    if (!used[i]) {
      excluded.x_ml.push_back(x[i]);
      excluded.y.push_back(y[i]);
    }
  }
  result.diagnostics.series.push_back(std::move(excluded));
  result.diagnostics.markers.push_back({"endpoint 1", MarkerAxis::volume, crossing});
  return result;
}

}  // namespace veq::detection
