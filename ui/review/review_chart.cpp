#include "ui/review/review_chart.hpp"

#include <algorithm>
#include <cmath>

#include <QtCharts/QChart>
#include <QtCharts/QChartView>
#include <QtCharts/QDateTimeAxis>
#include <QtCharts/QLegend>
#include <QtCharts/QLegendMarker>
#include <QtCharts/QLineSeries>
#include <QtCharts/QScatterSeries>
#include <QtCharts/QValueAxis>
#include <QtCore/QDateTime>
#include <QtGui/QPainter>
#include <QtGui/QPen>

#include "ui/run_plot.hpp"

namespace veq::ui::review {

struct ReviewChart::Parts {
  QChart* chart = nullptr;
  QChartView* view = nullptr;
};

namespace {

struct Range {
  double lo = INFINITY;
  double hi = -INFINITY;
  void take(double v) {
    if (std::isfinite(v)) {
      lo = std::min(lo, v);
      hi = std::max(hi, v);
    }
  }
  bool empty() const { return !(lo <= hi); }
  /// A little room around the data so that points do not sit on the frame.
  void pad() {
    if (empty()) {
      lo = 0.0;
      hi = 1.0;
    }
    double span = hi - lo;
    if (span <= 0.0)
      span = std::max(1e-9, std::abs(hi));
    lo -= 0.04 * span;
    hi += 0.04 * span;
  }
};

/// Widens [lo, hi] to whole multiples of a round step (1, 2 or 5 times a
/// power of ten) giving about six intervals, as the run view's chart does.
void set_round_range(QValueAxis* axis, double lo, double hi) {
  const auto r = round_range(lo, hi);
  if (!r) {
    axis->setRange(lo, hi);
    return;
  }
  const double round_lo = r->lo, round_hi = r->hi, step = r->step;
  axis->setRange(round_lo, round_hi);
  axis->setTickCount(r->ticks);
  // As many decimals as the step needs, so that neighbouring labels differ.
  const double largest = std::max(std::abs(round_lo), std::abs(round_hi));
  if (largest >= 1e6 || (largest > 0.0 && largest < 1e-4)) {
    axis->setLabelFormat("%.3g");
  } else {
    const int decimals = std::max(0, static_cast<int>(std::ceil(-std::log10(step) - 1e-9)));
    axis->setLabelFormat(QStringLiteral("%.%1f").arg(decimals));
  }
}

Qt::PenStyle pen_style(ChartLine::Style style) {
  switch (style) {
    case ChartLine::Style::dashed:
      return Qt::DashLine;
    case ChartLine::Style::dotted:
      return Qt::DotLine;
    default:
      return Qt::SolidLine;
  }
}

QAbstractSeries* make_series(const ChartLine& line) {
  if (line.style == ChartLine::Style::points) {
    auto* dots = new QScatterSeries();
    dots->setMarkerSize(7.0);
    dots->setColor(QColor(QRgb(line.rgb)));
    dots->setBorderColor(QColor(QRgb(line.rgb)).darker(130));
    for (std::size_t i = 0; i < line.x.size() && i < line.y.size(); ++i)
      dots->append(line.x[i], line.y[i]);
    dots->setName(line.label);
    return dots;
  }
  auto* series = new QLineSeries();
  QPen pen{QColor(QRgb(line.rgb))};
  pen.setWidthF(1.6);
  pen.setStyle(pen_style(line.style));
  series->setPen(pen);
  for (std::size_t i = 0; i < line.x.size() && i < line.y.size(); ++i)
    if (std::isfinite(line.x[i]) && std::isfinite(line.y[i]))
      series->append(line.x[i], line.y[i]);
  series->setName(line.label);
  return series;
}

QLineSeries* rule_series(const ChartRule& rule, double x0, double y0, double x1, double y1) {
  auto* series = new QLineSeries();
  QPen pen{QColor(QRgb(rule.rgb))};
  pen.setWidthF(1.6);
  pen.setStyle(pen_style(rule.style));
  series->setPen(pen);
  series->append(x0, y0);
  series->append(x1, y1);
  series->setName(rule.label);
  return series;
}

}  // namespace

unsigned chart_colour(std::size_t index) {
  static const unsigned colours[] = {0xC62828, 0x2E7D32, 0x6A1B9A, 0xEF6C00,
                                     0x00838F, 0xAD1457, 0x4E342E, 0x283593};
  return colours[index % (sizeof colours / sizeof colours[0])];
}

ReviewChart::ReviewChart(QWidget* parent) : parts_(std::make_unique<Parts>()) {
  parts_->chart = new QChart();
  // Animations would make an offscreen screenshot catch a half-drawn chart.
  parts_->chart->setAnimationOptions(QChart::NoAnimation);
  parts_->chart->legend()->setAlignment(Qt::AlignBottom);
  parts_->chart->setMargins(QMargins(2, 2, 2, 2));
  parts_->view = new QChartView(parts_->chart, parent);
  parts_->view->setRenderHint(QPainter::Antialiasing);
  parts_->view->setMinimumHeight(180);
}

ReviewChart::~ReviewChart() = default;

QWidget* ReviewChart::widget() const {
  return parts_->view;
}

void ReviewChart::clear(const QString& message) {
  // A new chart each time: Qt Charts 6.4 can leave the old axes drawn when
  // axes are removed from a chart that has not been laid out yet.
  QChart* old = parts_->chart;
  parts_->chart = new QChart();
  parts_->chart->setAnimationOptions(QChart::NoAnimation);
  parts_->chart->legend()->setAlignment(Qt::AlignBottom);
  parts_->chart->setMargins(QMargins(2, 2, 2, 2));
  parts_->chart->setTitle(message);
  parts_->view->setChart(parts_->chart);
  delete old;
}

QStringList ReviewChart::drawn_names() const {
  QStringList names;
  for (QAbstractSeries* s : parts_->chart->series())
    names << s->name();
  return names;
}

void ReviewChart::show(const ChartContent& content) {
  clear(content.title);
  QChart* chart = parts_->chart;

  Range x, left, right;
  for (const auto& line : content.lines) {
    for (double v : line.x)
      x.take(v);
    for (double v : line.y)
      (line.right_axis ? right : left).take(v);
  }
  for (const auto& rule : content.horizontals)
    left.take(rule.value);
  for (const auto& rule : content.verticals)
    x.take(rule.value);
  x.pad();
  left.pad();
  right.pad();
  if (!content.x_is_time && x.lo < 0.0 && x.lo > -1.0)
    x.lo = 0.0;  // volumes start at zero; a negative axis would suggest a negative volume

  QAbstractAxis* x_axis = nullptr;
  if (content.x_is_time) {
    auto* time_axis = new QDateTimeAxis();
    // Days and times: a demo's or a busy day's values lie minutes apart.
    time_axis->setFormat("MM-dd hh:mm");
    time_axis->setRange(QDateTime::fromMSecsSinceEpoch(static_cast<qint64>(x.lo), Qt::UTC),
                        QDateTime::fromMSecsSinceEpoch(static_cast<qint64>(x.hi), Qt::UTC));
    time_axis->setTickCount(5);
    x_axis = time_axis;
  } else {
    auto* value_axis = new QValueAxis();
    set_round_range(value_axis, x.lo, x.hi);
    x_axis = value_axis;
  }
  x_axis->setTitleText(content.x_title);
  auto* y_axis = new QValueAxis();
  y_axis->setTitleText(content.y_title);
  set_round_range(y_axis, left.lo, left.hi);
  chart->addAxis(x_axis, Qt::AlignBottom);
  chart->addAxis(y_axis, Qt::AlignLeft);
  QValueAxis* right_axis = nullptr;
  if (!content.right_title.isEmpty()) {
    right_axis = new QValueAxis();
    right_axis->setTitleText(content.right_title);
    set_round_range(right_axis, right.lo, right.hi);
    // Short labels: Qt Charts would otherwise elide them to "..." when the
    // right axis is sized before its labels are known.
    right_axis->setTruncateLabels(false);
    chart->addAxis(right_axis, Qt::AlignRight);
  }

  auto attach = [&](QAbstractSeries* s, bool on_right) {
    chart->addSeries(s);
    s->attachAxis(x_axis);
    s->attachAxis(on_right && right_axis ? right_axis : y_axis);
    // An unnamed line is the twin of a named one (the lower of two limits).
    if (s->name().isEmpty())
      for (QLegendMarker* marker : chart->legend()->markers(s))
        marker->setVisible(false);
  };
  for (const auto& line : content.lines) {
    QAbstractSeries* series = make_series(line);
    attach(series, line.right_axis);
    if (!line.in_legend)
      for (QLegendMarker* marker : chart->legend()->markers(series))
        marker->setVisible(false);
  }
  // Rules span the whole (rounded) axes.
  for (const auto& rule : content.verticals)
    attach(rule_series(rule, rule.value, y_axis->min(), rule.value, y_axis->max()), false);
  double x_lo = x.lo, x_hi = x.hi;
  if (auto* value_axis = qobject_cast<QValueAxis*>(x_axis)) {
    x_lo = value_axis->min();
    x_hi = value_axis->max();
  }
  for (const auto& rule : content.horizontals)
    attach(rule_series(rule, x_lo, rule.value, x_hi, rule.value), false);
}

}  // namespace veq::ui::review
