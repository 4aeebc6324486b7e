// What the run view draws, computed from the store without any Qt: the
// titration curve, its first derivative and the endpoints, with titles and a
// one-paragraph summary. The chart adapter only turns this into pixels.
#pragma once

#include <cstdint>
#include <optional>
#include <string>
#include <vector>

#include "common/result.hpp"
#include "controller/store/run_store.hpp"

namespace veq::ui {

/// One line of (x, y) points with its axis titles.
struct PlotSeries {
  std::string label;    ///< legend text
  std::string x_title;  ///< e.g. "titrant added (mL)"
  std::string y_title;  ///< e.g. "potential (mV)"
  std::vector<double> x;
  std::vector<double> y;
};

/// A vertical line at a volume (mL), e.g. an endpoint.
struct PlotMarker {
  std::string label;  ///< "endpoint 10.002 mL"
  double volume_ml = 0.0;
};

struct RunPlot {
  std::int64_t run_id = 0;
  std::string title;    ///< "Run 3: rinse-water-A"
  std::string summary;  ///< status, how it ended, endpoint and result
  PlotSeries curve;     ///< signal against volume, as measured
  /// dSignal/dV on the real volumes, as the derivative method computes it;
  /// empty when the curve has too few points (see note).
  PlotSeries derivative;
  std::vector<PlotMarker> endpoints;
  /// Where the endpoints come from, or why something is missing.
  std::string note;
};

/// Loads a run and computes its plot. The endpoints are those of the run's
/// latest stored evaluation; a run without one (still running, failed before
/// its evaluation) gets them recomputed with the derivative method, and the
/// note says so. The derivative uses the options stored with the evaluation
/// (or with the run's method), so the drawn curve is the one the endpoint
/// came from. Errors: not_found for a missing run, storage if it cannot be
/// read.
Result<RunPlot> build_run_plot(store::RunStore& store, std::int64_t run_id);

/// One line per run for a list: "3  rinse-water-A  completed  2026-12-02 01:48".
std::string run_list_label(const store::RunRecord& run);

/// An axis range widened to whole multiples of a round step (1, 2 or 5 times
/// a power of ten) giving about six intervals, for the desktop's charts.
struct RoundRange {
  double lo = 0.0;
  double hi = 0.0;
  double step = 0.0;
  int ticks = 0;  ///< tick marks from lo to hi, both included
};
/// Nothing if hi - lo is not a positive finite span.
std::optional<RoundRange> round_range(double lo, double hi);

}  // namespace veq::ui
