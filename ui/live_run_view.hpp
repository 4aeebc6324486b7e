// The live run: the curve and its first derivative growing as points
// arrive, the present volume, signal and drift, the run's state, and the
// endpoints once the run is evaluated. Points are collected as they come and
// drawn together at most every `redraw_interval_ms`, so that a fast run (a
// virtual-time series delivers thousands of points a second) never floods
// the window.
#pragma once

#include <memory>
#include <vector>

#include <QtCore/QList>
#include <QtWidgets/QWidget>

class QLabel;
class QListWidget;
class QTimer;

namespace veq::ui {

class CurveChart;
class RackWorker;

class LiveRunView : public QWidget {
  Q_OBJECT

 public:
  /// Chart redraws at most this often (ms): 150 ms looks continuous to the
  /// eye while a redraw of a few hundred points costs far less.
  static constexpr int kRedrawIntervalMs = 150;

  explicit LiveRunView(QWidget* parent = nullptr);
  ~LiveRunView() override;

  /// Listens to a worker's run events.
  void follow(RackWorker& worker);

  /// A new run: empties the charts. `label` names the sample.
  void begin_run(const QString& label);
  void add_point(qint64 index, double volume_ml, double signal, double drift_per_min,
                 double time_s);
  void set_state(const QString& from, const QString& to, const QString& reason);
  void add_message(const QString& text);
  void show_endpoints(const QList<double>& volumes_ml);
  /// Draws what has arrived now (the timer does this on its own).
  void redraw();

  /// Points received in the present run.
  int point_count() const { return static_cast<int>(volume_ml_.size()); }
  /// Points on the curve chart after the last redraw.
  int drawn_point_count() const { return drawn_; }
  /// Redraws done since the run began (for the batching test).
  int redraw_count() const { return redraws_; }
  QString state_text() const;
  /// The volume figure as last drawn ("19.980 mL").
  QString volume_text() const;

 private:
  std::vector<double> volume_ml_, signal_mv_;
  std::vector<double> endpoints_ml_;
  double drift_per_min_ = 0.0;
  bool dirty_ = false;
  int drawn_ = 0;
  int redraws_ = 0;
  QLabel* title_ = nullptr;
  QLabel* state_ = nullptr;
  QLabel* volume_ = nullptr;
  QLabel* signal_ = nullptr;
  QLabel* drift_ = nullptr;
  QLabel* endpoint_ = nullptr;
  QListWidget* messages_ = nullptr;
  QTimer* timer_ = nullptr;
  std::unique_ptr<CurveChart> curve_chart_;
  std::unique_ptr<CurveChart> derivative_chart_;
};

}  // namespace veq::ui
