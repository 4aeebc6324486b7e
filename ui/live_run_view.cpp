#include "ui/live_run_view.hpp"

#include <algorithm>
#include <cstdio>

#include <QtCore/QTimer>
#include <QtWidgets/QFormLayout>
#include <QtWidgets/QGridLayout>
#include <QtWidgets/QHBoxLayout>
#include <QtWidgets/QLabel>
#include <QtWidgets/QListWidget>
#include <QtWidgets/QSplitter>
#include <QtWidgets/QVBoxLayout>

#include "ui/curve_chart.hpp"
#include "ui/rack_worker.hpp"

namespace veq::ui {

namespace {

QString fixed(double x, int decimals) {
  return QString::number(x, 'f', decimals);
}

/// Messages kept in the list: a run says a few dozen things; an hour of
/// series keeps the last few hundred.
constexpr int kMessagesKept = 400;

}  // namespace

LiveRunView::LiveRunView(QWidget* parent) : QWidget(parent) {
  title_ = new QLabel("No run yet: start a series on the Series view.");
  QFont big = title_->font();
  big.setPointSizeF(big.pointSizeF() * 1.3);
  big.setBold(true);
  title_->setFont(big);

  auto* figures = new QGridLayout();
  auto figure = [&](int column, const QString& name, QLabel** value) {
    auto* caption = new QLabel(name);
    *value = new QLabel("-");
    QFont f = (*value)->font();
    f.setPointSizeF(f.pointSizeF() * 1.4);
    (*value)->setFont(f);
    (*value)->setTextInteractionFlags(Qt::TextSelectableByMouse);
    figures->addWidget(caption, 0, column);
    figures->addWidget(*value, 1, column);
  };
  figure(0, "State", &state_);
  figure(1, "Volume added", &volume_);
  figure(2, "Signal", &signal_);
  figure(3, "Drift", &drift_);
  figure(4, "Endpoints", &endpoint_);

  curve_chart_ = std::make_unique<CurveChart>();
  derivative_chart_ = std::make_unique<CurveChart>();
  curve_chart_->clear("titration curve: waiting for points");
  derivative_chart_->clear("first derivative: waiting for points");
  messages_ = new QListWidget();
  messages_->setAccessibleName("run messages");
  messages_->setWordWrap(true);

  auto* charts = new QSplitter(Qt::Vertical);
  charts->addWidget(curve_chart_->widget());
  charts->addWidget(derivative_chart_->widget());
  auto* split = new QSplitter(Qt::Horizontal);
  split->addWidget(charts);
  split->addWidget(messages_);
  split->setStretchFactor(0, 3);
  split->setStretchFactor(1, 1);
  split->setSizes({750, 250});

  auto* layout = new QVBoxLayout(this);
  layout->addWidget(title_);
  layout->addLayout(figures);
  layout->addWidget(split, 1);

  timer_ = new QTimer(this);
  timer_->setInterval(kRedrawIntervalMs);
  connect(timer_, &QTimer::timeout, this, [this] {
    if (dirty_)
      redraw();
  });
  timer_->start();
}

LiveRunView::~LiveRunView() = default;

void LiveRunView::follow(RackWorker& worker) {
  connect(&worker, &RackWorker::run_started, this, &LiveRunView::begin_run);
  connect(&worker, &RackWorker::point_measured, this, &LiveRunView::add_point);
  connect(&worker, &RackWorker::run_state_changed, this, &LiveRunView::set_state);
  connect(&worker, &RackWorker::run_message, this, &LiveRunView::add_message);
  connect(&worker, &RackWorker::endpoints_found, this,
          [this](const QList<double>& v, const QString&) { show_endpoints(v); });
}

void LiveRunView::begin_run(const QString& label) {
  volume_ml_.clear();
  signal_mv_.clear();
  endpoints_ml_.clear();
  drawn_ = 0;
  redraws_ = 0;
  dirty_ = true;
  title_->setText("Sample: " + label);
  volume_->setText("0.000 mL");
  signal_->setText("-");
  drift_->setText("-");
  endpoint_->setText("not yet evaluated");
}

void LiveRunView::add_point(qint64 /*index*/, double volume_ml, double signal, double drift_per_min,
                            double /*time_s*/) {
  volume_ml_.push_back(volume_ml);
  signal_mv_.push_back(signal);
  drift_per_min_ = drift_per_min;
  // Figures and charts wait for the timer: a label's new text can re-lay
  // out the whole window, too much to do for every point of a fast run.
  dirty_ = true;
}

void LiveRunView::set_state(const QString& /*from*/, const QString& to, const QString& reason) {
  state_->setText(to);
  state_->setToolTip(reason);
  if (!reason.isEmpty() && (to == "failed" || to == "aborted"))
    add_message(to + ": " + reason);
}

void LiveRunView::add_message(const QString& text) {
  messages_->addItem(text);
  while (messages_->count() > kMessagesKept)
    delete messages_->takeItem(0);
  messages_->scrollToBottom();
}

void LiveRunView::show_endpoints(const QList<double>& volumes_ml) {
  endpoints_ml_.assign(volumes_ml.begin(), volumes_ml.end());
  QStringList text;
  for (double v : volumes_ml)
    text << fixed(v, 3) + " mL";
  endpoint_->setText(text.isEmpty() ? "none found" : text.join(", "));
  dirty_ = true;
  redraw();
}

QString LiveRunView::state_text() const {
  return state_->text();
}

QString LiveRunView::volume_text() const {
  return volume_->text();
}

void LiveRunView::redraw() {
  dirty_ = false;
  ++redraws_;
  drawn_ = static_cast<int>(volume_ml_.size());
  if (!volume_ml_.empty()) {
    volume_->setText(fixed(volume_ml_.back(), 3) + " mL");
    signal_->setText(fixed(signal_mv_.back(), 1) + " mV");
    drift_->setText(fixed(drift_per_min_, 2) + " mV/min");
  }
  if (volume_ml_.empty()) {
    curve_chart_->clear("titration curve: waiting for points");
    derivative_chart_->clear("first derivative: waiting for points");
    return;
  }
  PlotSeries curve;
  curve.label = "potential";
  curve.x_title = "titrant added (mL)";
  curve.y_title = "potential (mV)";
  curve.x = volume_ml_;
  curve.y = signal_mv_;
  // The first derivative between neighbouring points, at their middle
  // volume: what an operator reads while the run goes on (the stored
  // evaluation smooths it; the Stored runs view shows that one).
  PlotSeries derivative;
  derivative.label = "first derivative";
  derivative.x_title = "titrant added (mL)";
  derivative.y_title = "mV/mL";
  for (std::size_t i = 1; i < volume_ml_.size(); ++i) {
    const double dv = volume_ml_[i] - volume_ml_[i - 1];
    if (dv <= 0.0)
      continue;
    derivative.x.push_back(0.5 * (volume_ml_[i] + volume_ml_[i - 1]));
    derivative.y.push_back((signal_mv_[i] - signal_mv_[i - 1]) / dv);
  }
  std::vector<PlotMarker> markers;
  for (double v : endpoints_ml_) {
    char label[48];
    std::snprintf(label, sizeof label, "endpoint %.3f mL", v);
    markers.push_back(PlotMarker{label, v});
  }
  double hi = *std::max_element(volume_ml_.begin(), volume_ml_.end());
  for (double v : endpoints_ml_)
    hi = std::max(hi, v);
  const double x_max = std::max(1.0, hi * 1.05);
  curve_chart_->show(curve, markers, 0.0, x_max, volume_ml_.size() < 150);
  if (derivative.x.empty())
    derivative_chart_->clear("first derivative: needs two points");
  else
    derivative_chart_->show(derivative, markers, 0.0, x_max, false);
}

}  // namespace veq::ui
