// The one place that knows the plotting library. Everything else hands it
// plain PlotSeries and PlotMarker values; swapping Qt Charts for another
// library means rewriting curve_chart.cpp only.
#pragma once

#include <memory>
#include <vector>

#include "ui/run_plot.hpp"

class QWidget;
class QString;

namespace veq::ui {

/// A chart of one series against titrant volume, with vertical endpoint lines.
class CurveChart {
 public:
  explicit CurveChart(QWidget* parent = nullptr);
  ~CurveChart();
  CurveChart(const CurveChart&) = delete;
  CurveChart& operator=(const CurveChart&) = delete;

  /// The widget to put in a layout (owned by its Qt parent).
  QWidget* widget() const;

  /// Draws a series (line with point markers if show_points) and vertical
  /// marker lines across its whole height. x_min_ml..x_max_ml fixes the
  /// volume axis, so that stacked charts line up.
  void show(const PlotSeries& series, const std::vector<PlotMarker>& markers, double x_min_ml,
            double x_max_ml, bool show_points);
  /// Empties the chart and shows a short message as its title.
  void clear(const QString& message);

  /// Colour of the endpoint lines (also used by tests to find them), 0xRRGGBB.
  static constexpr unsigned kMarkerRgb = 0xC62828;

 private:
  struct Parts;
  std::unique_ptr<Parts> parts_;
};

}  // namespace veq::ui
