// Writes the diagnostic pictures of docs/detection.md: each endpoint method
// evaluated on an invented demo curve, drawn as SVG from the evaluation's
// own diagnostics (no plotting library needed).
//
//   veq_detection_demo_plots OUTPUT_DIR
//
// writes detection-derivative.svg, detection-segments.svg,
// detection-crossing.svg, detection-gran.svg, detection-model.svg and
// detection-trials.svg, and prints the endpoints as a Markdown table.
#include <algorithm>
#include <cmath>
#include <cstdio>
#include <fstream>
#include <random>
#include <sstream>
#include <string>
#include <vector>

#include "chemistry/constants.hpp"
#include "chemistry/one_to_one.hpp"
#include "detection/crossing.hpp"
#include "detection/derivative.hpp"
#include "detection/gran.hpp"
#include "detection/model_fit.hpp"
#include "detection/segments.hpp"
#include "detection/trials.hpp"

namespace {

using veq::detection::Curve;
using veq::detection::DiagnosticSeries;
using veq::detection::Evaluation;
using veq::detection::MarkerAxis;

struct Line {
  std::vector<double> x, y;
  std::string colour;
  bool points = false;  // dots instead of a line
  std::string label;
};

struct Panel {
  std::string y_label;
  std::vector<Line> lines;
  std::vector<std::pair<double, std::string>> vertical;    // volume, label
  std::vector<std::pair<double, std::string>> horizontal;  // signal, label
};

std::string number(double x) {
  std::ostringstream s;
  s.precision(4);
  s << x;
  return s.str();
}

// Panels stacked vertically, sharing the volume axis.
void write_svg(const std::string& path, const std::string& title,
               const std::vector<Panel>& panels) {
  const double width = 720, panel_height = 220, left = 70, right = 20, top = 40, gap = 45;
  const double height = top + panels.size() * (panel_height + gap) + 10;
  double x_min = INFINITY, x_max = -INFINITY;
  for (const Panel& p : panels)
    for (const Line& l : p.lines)
      for (double x : l.x) {
        x_min = std::min(x_min, x);
        x_max = std::max(x_max, x);
      }
  std::ofstream out(path);
  out << "<svg xmlns='http://www.w3.org/2000/svg' width='" << width << "' height='" << height
      << "' font-family='DejaVu Sans, sans-serif' font-size='12'>\n"
      << "<rect width='100%' height='100%' fill='white'/>\n"
      << "<text x='" << left << "' y='22' font-size='14' font-weight='bold'>" << title
      << "</text>\n";
  const double plot_w = width - left - right;
  for (std::size_t k = 0; k < panels.size(); ++k) {
    const Panel& p = panels[k];
    const double y0 = top + k * (panel_height + gap);
    double y_min = INFINITY, y_max = -INFINITY;
    for (const Line& l : p.lines)
      for (double y : l.y) {
        y_min = std::min(y_min, y);
        y_max = std::max(y_max, y);
      }
    for (const auto& h : p.horizontal) {
      y_min = std::min(y_min, h.first);
      y_max = std::max(y_max, h.first);
    }
    const double pad = 0.05 * (y_max - y_min + 1e-12);
    y_min -= pad;
    y_max += pad;
    auto sx = [&](double x) { return left + (x - x_min) / (x_max - x_min) * plot_w; };
    auto sy = [&](double y) {
      return y0 + panel_height - (y - y_min) / (y_max - y_min) * panel_height;
    };
    out << "<rect x='" << left << "' y='" << y0 << "' width='" << plot_w << "' height='"
        << panel_height << "' fill='none' stroke='#444'/>\n";
    // Round tick steps of 1, 2 or 5 times a power of ten.
    auto ticks = [](double lo, double hi) {
      const double raw = (hi - lo) / 5.0;
      const double power = std::pow(10.0, std::floor(std::log10(raw)));
      const double step = raw / power < 1.5 ? power : raw / power < 3.5 ? 2 * power : 5 * power;
      std::vector<double> t;
      for (double x = std::ceil(lo / step) * step; x <= hi + 1e-9 * step; x += step)
        t.push_back(std::abs(x) < 1e-9 * step ? 0.0 : x);
      return t;
    };
    for (double xv : ticks(x_min, x_max))
      out << "<text x='" << sx(xv) << "' y='" << y0 + panel_height + 15 << "' text-anchor='middle'>"
          << number(xv) << "</text>\n";
    for (double yv : ticks(y_min, y_max))
      out << "<text x='" << left - 5 << "' y='" << sy(yv) + 4 << "' text-anchor='end'>"
          << number(yv) << "</text>\n";
    out << "<text x='" << left + plot_w / 2 << "' y='" << y0 + panel_height + 30
        << "' text-anchor='middle'>volume / mL</text>\n";
    out << "<text transform='translate(14," << y0 + panel_height / 2
        << ") rotate(-90)' text-anchor='middle'>" << p.y_label << "</text>\n";
    for (const auto& v : p.vertical) {
      out << "<line x1='" << sx(v.first) << "' x2='" << sx(v.first) << "' y1='" << y0 << "' y2='"
          << y0 + panel_height << "' stroke='#c00' stroke-dasharray='4 3'/>\n"
          << "<text x='" << sx(v.first) + 4 << "' y='" << y0 + panel_height - 8 << "' fill='#c00'>"
          << v.second << "</text>\n";
    }
    for (const auto& h : p.horizontal) {
      out << "<line x1='" << left << "' x2='" << left + plot_w << "' y1='" << sy(h.first)
          << "' y2='" << sy(h.first) << "' stroke='#070' stroke-dasharray='4 3'/>\n"
          << "<text x='" << left + 4 << "' y='" << sy(h.first) - 4 << "' fill='#070'>" << h.second
          << "</text>\n";
    }
    double legend_y = y0 + panel_height - 8 - 15.0 * (p.lines.size() - 1);
    for (const Line& l : p.lines) {
      if (l.points) {
        for (std::size_t i = 0; i < l.x.size(); ++i)
          out << "<circle cx='" << sx(l.x[i]) << "' cy='" << sy(l.y[i]) << "' r='2.8' fill='"
              << l.colour << "'/>\n";
      } else {
        out << "<polyline fill='none' stroke='" << l.colour << "' stroke-width='1.5' points='";
        for (std::size_t i = 0; i < l.x.size(); ++i)
          out << sx(l.x[i]) << ',' << sy(l.y[i]) << ' ';
        out << "'/>\n";
      }
      if (!l.label.empty()) {
        out << "<text x='" << left + 8 << "' y='" << legend_y << "' fill='" << l.colour << "'>"
            << l.label << "</text>\n";
        legend_y += 15;
      }
    }
  }
  out << "</svg>\n";
}

const DiagnosticSeries* find(const Evaluation& ev, const std::string& name) {
  for (const auto& s : ev.diagnostics.series)
    if (s.name == name)
      return &s;
  return nullptr;
}

void endpoint_row(const char* method, const Evaluation& ev) {
  for (const auto& e : ev.endpoints) {
    std::string flags;
    for (auto f : e.flags)
      flags += std::string(flags.empty() ? "" : ", ") + veq::detection::quality_flag_name(f);
    for (auto f : ev.flags)
      flags += std::string(flags.empty() ? "" : ", ") + veq::detection::quality_flag_name(f);
    std::printf("| %s | %.4f | %.4f | %.3f | %.4g | %s |\n", method, e.volume_ml, e.uncertainty_ml,
                e.signal, e.steepness, flags.empty() ? "none" : flags.c_str());
  }
}

veq::chemistry::OneToOneTitration titration(double metal, double sample_ml, double titrant,
                                            double constant) {
  veq::chemistry::OneToOneTitration t;
  t.metal_conc_mol_per_l = metal;
  t.sample_volume_ml = sample_ml;
  t.titrant_conc_mol_per_l = titrant;
  t.conditional_constant = constant;
  return t;
}

}  // namespace

int main(int argc, char** argv) {
  if (argc != 2) {
    std::fprintf(stderr, "usage: %s OUTPUT_DIR\n", argv[0]);
    return 2;
  }
  const std::string dir = argv[1];
  std::printf("| method | endpoint / mL | u / mL | signal | steepness | flags |\n");
  std::printf("|---|---|---|---|---|---|\n");

  // Demo 1: 50 mL of a 0.0100 mol/L calcium sample at pH 10 titrated with
  // 0.0487 mol/L EDTA (equivalence 10.267 mL), 0.1 mL steps, 0.3 mV noise,
  // one bad reading of +45 mV at 6.0 mL.
  {
    const auto t = titration(0.0100, 50.0, 0.0487, 0.30 * std::pow(10.0, 10.65));
    std::mt19937_64 rng(42);
    std::normal_distribution<double> noise(0.0, 0.3);
    veq::detection::CurveColumns c;
    for (int i = 0; i <= 140; ++i) {
      const double v = 0.1 * i;
      c.volume_ml.push_back(v);
      c.signal.push_back(150.0 - 29.58 * veq::chemistry::p_metal(t, v) + noise(rng) +
                         (i == 60 ? 45.0 : 0.0));
    }
    const Curve curve = Curve::from_columns(c).value();
    const Evaluation ev = veq::detection::find_endpoints_by_derivative(curve);
    Panel signal{"potential / mV",
                 {{curve.volume_ml(), curve.signal(), "#1f4e9a", true, "readings"}},
                 {},
                 {}};
    Panel slope{"dE/dV / (mV/mL)", {}, {}, {}};
    if (const auto* d = find(ev, "first_derivative"))
      slope.lines.push_back({d->x_ml, d->y, "#1f4e9a", false, "local quadratic slope"});
    if (const auto* s = find(ev, "spikes"))
      signal.lines.push_back({s->x_ml, s->y, "#e08000", true, "spike, replaced"});
    for (const auto& m : ev.diagnostics.markers) {
      signal.vertical.push_back({m.value, m.name + " " + number(m.value) + " mL"});
      slope.vertical.push_back({m.value, ""});
    }
    write_svg(dir + "/detection-derivative.svg",
              "Derivative method: calcium with EDTA (demo, equivalence 10.267 mL)",
              {signal, slope});
    endpoint_row("derivative", ev);
  }

  // Demo 2: photometric titration of 50 mL of 0.0020 mol/L metal whose
  // chelate absorbs (invented absorptivities 10 and 100 L/(mol cm)),
  // K' = 10^5 so the corner is rounded; titrant 0.0103 mol/L (equivalence
  // 9.709 mL), 0.25 mL steps, absorbance noise 0.0015.
  {
    const auto t = titration(0.0020, 50.0, 0.0103, std::pow(10.0, 5.0));
    std::mt19937_64 rng(7);
    std::normal_distribution<double> noise(0.0, 0.0015);
    veq::detection::CurveColumns c;
    c.kind = veq::detection::SignalKind::absorbance;
    c.sample_volume_ml = 50.0;
    for (int i = 0; i <= 80; ++i) {
      const double v = 0.25 * i;
      const double total = 0.0020 * 50.0 / (50.0 + v);
      const double free = veq::chemistry::free_metal_mol_per_l(t, v);
      c.volume_ml.push_back(v);
      c.signal.push_back(10.0 * free + 100.0 * (total - free) + noise(rng));
    }
    const Curve curve = Curve::from_columns(c).value();
    const Evaluation ev = veq::detection::find_endpoints_by_segments(curve);
    Panel p{"absorbance x (V0 + V)/V0", {}, {}, {}};
    if (const auto* s = find(ev, "fitted_signal"))
      p.lines.push_back({s->x_ml, s->y, "#1f4e9a", true, "dilution-corrected readings"});
    if (const auto* s = find(ev, "excluded_points"))
      p.lines.push_back({s->x_ml, s->y, "#e08000", true, "left out (curved region)"});
    if (const auto* s = find(ev, "left_segment"))
      p.lines.push_back({s->x_ml, s->y, "#070", false, "segments"});
    if (const auto* s = find(ev, "right_segment"))
      p.lines.push_back({s->x_ml, s->y, "#070", false, ""});
    for (const auto& m : ev.diagnostics.markers)
      p.vertical.push_back({m.value, m.name + " " + number(m.value) + " mL"});
    write_svg(dir + "/detection-segments.svg",
              "Segments method: photometric titration (demo, equivalence 9.709 mL)", {p});
    endpoint_row("segments", ev);
  }

  // Demo 3: the calcium curve of demo 1 without the spike, 0.2 mL steps,
  // evaluated at a preset potential of -95 mV.
  {
    const auto t = titration(0.0100, 50.0, 0.0487, 0.30 * std::pow(10.0, 10.65));
    std::mt19937_64 rng(43);
    std::normal_distribution<double> noise(0.0, 0.3);
    veq::detection::CurveColumns c;
    for (int i = 0; i <= 70; ++i) {
      const double v = 0.2 * i;
      c.volume_ml.push_back(v);
      c.signal.push_back(150.0 - 29.58 * veq::chemistry::p_metal(t, v) + noise(rng));
    }
    const Curve curve = Curve::from_columns(c).value();
    veq::detection::CrossingOptions options;
    options.level = -95.0;
    const Evaluation ev = veq::detection::find_endpoints_by_crossing(curve, options);
    Panel p{"potential / mV",
            {{curve.volume_ml(), curve.signal(), "#1f4e9a", false, "readings"}},
            {},
            {}};
    for (const auto& m : ev.diagnostics.markers) {
      if (m.axis == MarkerAxis::signal)
        p.horizontal.push_back({m.value, "preset " + number(m.value) + " mV"});
      else
        p.vertical.push_back({m.value, m.name + " " + number(m.value) + " mL"});
    }
    write_svg(dir + "/detection-crossing.svg",
              "Crossing method: the calcium demo at a preset -95 mV", {p});
    endpoint_row("crossing", ev);
  }

  const auto library = veq::chemistry::builtin_constants_library().value();

  // Demo 4: copper in an ammonia buffer (trial scenario ammonia_copper,
  // seed 3): the Gran functions with and without the metal fraction.
  {
    const auto scenario = veq::detection::builtin_trial_scenario("ammonia_copper").value();
    const auto trial = veq::detection::simulate_trial_curve(scenario, 3, library).value();
    veq::detection::GranOptions options;
    options.sample = scenario.sample;
    const Evaluation ev =
        veq::detection::find_endpoints_by_gran(trial.curve, options, library).value();
    options.correct_metal_fraction = false;
    options.sides = veq::detection::GranSides::before;
    const Evaluation plain =
        veq::detection::find_endpoints_by_gran(trial.curve, options, library).value();
    Panel signal{"potential / mV",
                 {{trial.curve.volume_ml(), trial.curve.signal(), "#1f4e9a", true, "readings"}},
                 {},
                 {}};
    Panel gran{"Gran function / mL", {}, {}, {}};
    if (const auto* s = find(ev, "gran_before"))
      gran.lines.push_back({s->x_ml, s->y, "#1f4e9a", true, "before, corrected with alpha(Cu)"});
    if (const auto* s = find(ev, "gran_before_line"))
      gran.lines.push_back({s->x_ml, s->y, "#070", false, "fitted lines"});
    if (const auto* s = find(ev, "gran_after"))
      gran.lines.push_back({s->x_ml, s->y, "#7a3fb0", true, "after"});
    if (const auto* s = find(ev, "gran_after_line"))
      gran.lines.push_back({s->x_ml, s->y, "#070", false, ""});
    if (const auto* s = find(plain, "gran_before"))
      gran.lines.push_back({s->x_ml, s->y, "#e08000", true, "before, plain (no alpha)"});
    if (const auto* s = find(plain, "gran_before_line"))
      gran.lines.push_back({s->x_ml, s->y, "#e08000", false, ""});
    for (const auto& m : ev.diagnostics.markers) {
      if (m.name == "endpoint 1") {
        signal.vertical.push_back({m.value, "endpoint " + number(m.value) + " mL"});
        gran.vertical.push_back({m.value, "corrected " + number(m.value) + " mL"});
      }
    }
    if (!plain.endpoints.empty())
      gran.vertical.push_back(
          {plain.endpoints[0].volume_ml, "plain " + number(plain.endpoints[0].volume_ml) + " mL"});
    write_svg(dir + "/detection-gran.svg",
              "Gran method: copper in ammonia (trial scenario, equivalence " +
                  number(trial.equivalence_ml[0]) + " mL)",
              {signal, gran});
    endpoint_row("gran", ev);
    endpoint_row("gran, plain, before only", plain);
  }

  // Demo 5: calcium and magnesium read by a calcium electrode (trial
  // scenario two_metals, seed 2): the fitted curve and its residuals.
  {
    const auto scenario = veq::detection::builtin_trial_scenario("two_metals").value();
    const auto trial = veq::detection::simulate_trial_curve(scenario, 2, library).value();
    veq::detection::ModelFitOptions options;
    options.sample = scenario.sample;
    const Evaluation ev =
        veq::detection::fit_titration_model(trial.curve, options, library).value();
    Panel signal{"potential / mV",
                 {{trial.curve.volume_ml(), trial.curve.signal(), "#1f4e9a", true, "readings"}},
                 {},
                 {}};
    if (const auto* s = find(ev, "fitted_signal"))
      signal.lines.push_back({s->x_ml, s->y, "#c00", false, "fitted model (general speciation)"});
    Panel residuals{"residual / mV", {}, {}, {}};
    if (const auto* s = find(ev, "residuals"))
      residuals.lines.push_back({s->x_ml, s->y, "#1f4e9a", true, "reading - model"});
    for (const auto& m : ev.diagnostics.markers) {
      signal.vertical.push_back({m.value, m.name + " " + number(m.value) + " mL"});
      residuals.vertical.push_back({m.value, ""});
    }
    write_svg(dir + "/detection-model.svg",
              "Model fit: calcium and magnesium, calcium electrode (true " +
                  number(trial.equivalence_ml[0]) + " and " + number(trial.equivalence_ml[1]) +
                  " mL)",
              {signal, residuals});
    endpoint_row("model", ev);
  }

  // Demo 6: detection trials on the weakest break (trial scenario
  // weak_log_k_5_5, 50 seeds): derivative, Gran and model side by side.
  {
    const auto scenario = veq::detection::builtin_trial_scenario("weak_log_k_5_5").value();
    std::vector<veq::detection::TrialCurve> curves;
    for (std::uint64_t seed = 1; seed <= 50; ++seed)
      curves.push_back(veq::detection::simulate_trial_curve(scenario, seed, library).value());
    std::vector<std::string> labels;
    std::vector<std::vector<veq::detection::TrialOutcome>> outcomes;
    for (const char* method : {"derivative", "gran", "model"}) {
      labels.push_back(method);
      outcomes.push_back(veq::detection::run_trials(
          curves, veq::detection::parse_trial_method(method).value(), scenario.sample, library));
    }
    std::ofstream(dir + "/detection-trials.svg")
        << veq::detection::trials_svg("Trials: weak_log_k_5_5, 50 seeds", labels, outcomes);
  }
  return 0;
}
