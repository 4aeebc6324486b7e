#include "ui/curve_chart.hpp"

#include <algorithm>
#include <cmath>

#include <QtCharts/QChart>
#include <QtCharts/QChartView>
#include <QtCharts/QLegendMarker>
#include <QtCharts/QLineSeries>
#include <QtCharts/QScatterSeries>
#include <QtCharts/QValueAxis>
#include <QtGui/QPainter>
#include <QtGui/QPen>

namespace veq::ui {

struct CurveChart::Parts {
  QChart* chart = nullptr;
  QChartView* view = nullptr;
};

namespace {

/// A little room around the data so that points do not sit on the frame.
void padded_range(double lo, double hi, double* out_lo, double* out_hi) {
  if (!std::isfinite(lo) || !std::isfinite(hi)) {
    lo = 0.0;
    hi = 1.0;
  }
  double span = hi - lo;
  if (span <= 0.0)
    span = std::max(1.0, std::abs(hi));
  *out_lo = lo - 0.02 * span;
  *out_hi = hi + 0.02 * span;
}

/// Widens [lo, hi] to whole multiples of a round step (1, 2 or 5 times a
/// power of ten) giving about six intervals (round_range), and sets the axis to it.
void set_round_range(QValueAxis* axis, double lo, double hi) {
  const auto r = round_range(lo, hi);
  if (!r) {
    axis->setRange(lo, hi);
    return;
  }
  axis->setRange(r->lo, r->hi);
  axis->setTickCount(r->ticks);
}

}  // namespace

CurveChart::CurveChart(QWidget* parent) : parts_(std::make_unique<Parts>()) {
  parts_->chart = new QChart();
  // Animations would make an offscreen screenshot catch a half-drawn chart.
  parts_->chart->setAnimationOptions(QChart::NoAnimation);
  parts_->chart->legend()->setAlignment(Qt::AlignTop);
  parts_->chart->setMargins(QMargins(4, 4, 4, 4));
  parts_->view = new QChartView(parts_->chart, parent);
  parts_->view->setRenderHint(QPainter::Antialiasing);
  parts_->view->setMinimumHeight(200);
}

CurveChart::~CurveChart() = default;

QWidget* CurveChart::widget() const {
  return parts_->view;
}

void CurveChart::clear(const QString& message) {
  QChart* chart = parts_->chart;
  chart->removeAllSeries();
  for (QAbstractAxis* axis : chart->axes()) {
    chart->removeAxis(axis);
    delete axis;
  }
  chart->setTitle(message);
}

void CurveChart::show(const PlotSeries& series, const std::vector<PlotMarker>& markers,
                      double x_min_ml, double x_max_ml, bool show_points) {
  clear(QString());
  QChart* chart = parts_->chart;

  auto* line = new QLineSeries();
  line->setName(QString::fromStdString(series.label));
  QPen pen(QColor(0x1565C0));
  pen.setWidthF(1.5);
  line->setPen(pen);
  double y_lo = INFINITY, y_hi = -INFINITY;
  for (std::size_t i = 0; i < series.x.size() && i < series.y.size(); ++i) {
    line->append(series.x[i], series.y[i]);
    y_lo = std::min(y_lo, series.y[i]);
    y_hi = std::max(y_hi, series.y[i]);
  }
  chart->addSeries(line);

  QScatterSeries* dots = nullptr;
  if (show_points) {
    dots = new QScatterSeries();
    dots->setName("points");
    dots->setMarkerSize(5.0);
    dots->setColor(QColor(0x1565C0));
    dots->setBorderColor(QColor(0x0D47A1));
    for (std::size_t i = 0; i < series.x.size() && i < series.y.size(); ++i)
      dots->append(series.x[i], series.y[i]);
    chart->addSeries(dots);
    // The dots belong to the measured line: one legend entry for both.
    for (QLegendMarker* legend_marker : chart->legend()->markers(dots))
      legend_marker->setVisible(false);
  }

  double lo = 0.0, hi = 1.0, x_lo = 0.0, x_hi = 1.0;
  padded_range(y_lo, y_hi, &lo, &hi);
  padded_range(x_min_ml, x_max_ml, &x_lo, &x_hi);
  // Volumes start at zero; an axis reaching below it would suggest a
  // negative volume.
  if (x_min_ml >= 0.0)
    x_lo = std::max(0.0, x_lo);

  auto* x_axis = new QValueAxis();
  x_axis->setTitleText(QString::fromStdString(series.x_title));
  set_round_range(x_axis, x_lo, x_hi);
  x_axis->setLabelFormat("%.4g");
  auto* y_axis = new QValueAxis();
  y_axis->setTitleText(QString::fromStdString(series.y_title));
  set_round_range(y_axis, lo, hi);
  y_axis->setLabelFormat("%.4g");
  // Endpoint lines span the whole (rounded) signal axis.
  for (const auto& m : markers) {
    auto* marker = new QLineSeries();
    marker->setName(QString::fromStdString(m.label));
    QPen marker_pen{QColor(QRgb(kMarkerRgb))};
    marker_pen.setWidthF(2.0);
    marker_pen.setStyle(Qt::DashLine);
    marker->setPen(marker_pen);
    marker->append(m.volume_ml, y_axis->min());
    marker->append(m.volume_ml, y_axis->max());
    chart->addSeries(marker);
  }

  chart->addAxis(x_axis, Qt::AlignBottom);
  chart->addAxis(y_axis, Qt::AlignLeft);
  for (QAbstractSeries* s : chart->series()) {
    s->attachAxis(x_axis);
    s->attachAxis(y_axis);
  }
}

}  // namespace veq::ui
