// The review views' one chart: lines, point clouds, vertical markers at
// volumes and horizontal limit lines, on a left and an optional right axis,
// against volume or against time. The only file of ui/review that includes
// Qt Charts (a slow header), and the only one that knows the chart library.
#pragma once

#include <memory>
#include <vector>

#include <QtCore/QString>
#include <QtCore/QStringList>

class QWidget;

namespace veq::ui::review {

/// One line of (x, y) values. x is in the chart's x unit (mL, or
/// milliseconds since 1970 for a time chart).
struct ChartLine {
  enum class Style { solid, dashed, dotted, points };
  QString label;
  std::vector<double> x;
  std::vector<double> y;
  unsigned rgb = 0x1565C0;  ///< 0xRRGGBB
  Style style = Style::solid;
  bool right_axis = false;  ///< drawn against the right axis
  bool in_legend = true;    ///< false: drawn, named for tests, left out of the legend
};

/// A straight line across the whole chart: vertical at an x value, or
/// horizontal at a y value of the left axis.
struct ChartRule {
  QString label;
  double value = 0.0;
  unsigned rgb = 0xC62828;
  ChartLine::Style style = ChartLine::Style::dashed;
};

struct ChartContent {
  QString title;
  QString x_title;
  QString y_title;
  QString right_title;  ///< empty: no right axis
  bool x_is_time = false;
  std::vector<ChartLine> lines;
  std::vector<ChartRule> verticals;
  std::vector<ChartRule> horizontals;
};

class ReviewChart {
 public:
  explicit ReviewChart(QWidget* parent = nullptr);
  ~ReviewChart();
  ReviewChart(const ReviewChart&) = delete;
  ReviewChart& operator=(const ReviewChart&) = delete;

  QWidget* widget() const;
  void show(const ChartContent& content);
  /// Empties the chart and shows a short message as its title.
  void clear(const QString& message);
  /// Legend names of everything drawn (lines and rules), for tests.
  QStringList drawn_names() const;

 private:
  struct Parts;
  std::unique_ptr<Parts> parts_;
};

/// Colours for the n-th evaluation, line or history (a fixed cycle that
/// stays distinguishable in print).
unsigned chart_colour(std::size_t index);

}  // namespace veq::ui::review
