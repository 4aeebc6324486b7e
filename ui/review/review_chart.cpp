#include "ui/review/review_chart.hpp"

#include <algorithm>
#include <cmath>

#include <QtCharts/QChart>
#include <QtCharts/QChartView>
#include <QtCharts/QDateTimeAxis>
#include <QtCharts/QLegend>
#include <QtCharts/QLineSeries>
#include <QtCharts/QScatterSeries>
#include <QtCharts/QValueAxis>
#include <QtCore/QDateTime>
#include <QtGui/QPainter>
#include <QtGui/QPen>

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
  QChart* chart = parts_->chart;
  chart->removeAllSeries();
  for (QAbstractAxis* axis : chart->axes()) {
    chart->removeAxis(axis);
    delete axis;
  }
  chart->setTitle(message);
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
    time_axis->setFormat("yyyy-MM-dd");
    time_axis->setRange(QDateTime::fromMSecsSinceEpoch(static_cast<qint64>(x.lo), Qt::UTC),
                        QDateTime::fromMSecsSinceEpoch(static_cast<qint64>(x.hi), Qt::UTC));
    time_axis->setTickCount(5);
    x_axis = time_axis;
  } else {
    auto* value_axis = new QValueAxis();
    value_axis->setRange(x.lo, x.hi);
    value_axis->setLabelFormat("%.4g");
    x_axis = value_axis;
  }
  x_axis->setTitleText(content.x_title);
  auto* y_axis = new QValueAxis();
  y_axis->setTitleText(content.y_title);
  y_axis->setRange(left.lo, left.hi);
  y_axis->setLabelFormat("%.5g");
  chart->addAxis(x_axis, Qt::AlignBottom);
  chart->addAxis(y_axis, Qt::AlignLeft);
  QValueAxis* right_axis = nullptr;
  if (!content.right_title.isEmpty()) {
    right_axis = new QValueAxis();
    right_axis->setTitleText(content.right_title);
    right_axis->setRange(right.lo, right.hi);
    right_axis->setLabelFormat("%.4g");
    chart->addAxis(right_axis, Qt::AlignRight);
  }

  auto attach = [&](QAbstractSeries* s, bool on_right) {
    chart->addSeries(s);
    s->attachAxis(x_axis);
    s->attachAxis(on_right && right_axis ? right_axis : y_axis);
  };
  for (const auto& line : content.lines)
    attach(make_series(line), line.right_axis);
  for (const auto& rule : content.verticals)
    attach(rule_series(rule, rule.value, left.lo, rule.value, left.hi), false);
  for (const auto& rule : content.horizontals)
    attach(rule_series(rule, x.lo, rule.value, x.hi, rule.value), false);
}

}  // namespace veq::ui::review
