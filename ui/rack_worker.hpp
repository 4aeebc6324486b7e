// The one thread that talks to the instruments. The views hand it jobs
// (open the rack, test the connections, read the electrode, run a series,
// weigh portions); it answers through Qt signals that are always emitted on
// the GUI thread (each answer is posted to this object's thread as a queued
// call), so the window never waits on a device and never touches one.
#pragma once

#include <atomic>
#include <condition_variable>
#include <deque>
#include <functional>
#include <memory>
#include <mutex>
#include <optional>
#include <string>
#include <thread>
#include <vector>

#include <QtCore/QList>
#include <QtCore/QObject>
#include <QtCore/QString>

#include "controller/series/series.hpp"
#include "controller/series/series_runner.hpp"
#include "ui/rack.hpp"

namespace veq::ui {

class RackWorker : public QObject {
  Q_OBJECT

 public:
  explicit RackWorker(QObject* parent = nullptr);
  /// shutdown(): a worker never outlives its owner, never leaves a burette
  /// dosing.
  ~RackWorker() override;
  RackWorker(const RackWorker&) = delete;
  RackWorker& operator=(const RackWorker&) = delete;

  /// Opens the instruments (closing those open before); answers with
  /// rack_opened. Refused while a series runs.
  void open(const RackSettings& settings);
  /// Asks every device who it is; answers with role_answered per device and
  /// then connections_tested.
  void test_connections();
  /// One electrode reading (sensor_read or sensor_failed). Skipped while a
  /// reading is still on its way or a series runs (the series reads the
  /// electrode itself and its points show on the live view). On simulated
  /// instruments `advance_s` of virtual time pass first.
  void read_sensor(double advance_s);
  /// Runs a series into the SQLite file at `database_path` (opened by the
  /// worker with its own connection). With `prepare_demo`, the demo rack's
  /// methods, titrants and titer are stored first.
  void start_series(const series::Series& series, const std::string& database_path,
                    bool prepare_demo);
  /// Weighs the portions marked "g from balance": each instruction comes as
  /// weighing_instruction, and the weighing goes on when the operator calls
  /// continue_weighing(). Answers with weighing_done and the series with
  /// its masses.
  void weigh(const series::Series& series);
  void continue_weighing();

  /// Pause: the vessel being worked on is finished, then the series waits
  /// before the next one (paused_between_vessels).
  void set_paused(bool paused);
  bool paused() const { return pause_.load(); }
  /// Ends the series at its next step; on real instruments every burette is
  /// also told to stop at once (from a helper thread: the window does not
  /// wait for the reply).
  void abort();
  /// abort(), then waits for the worker thread to end (stopping burettes is
  /// the series' last act). Blocks; afterwards no job runs.
  void shutdown();

  /// A series (or a weighing) is running.
  bool busy() const { return busy_.load(); }
  /// The opened rack. Only while no job runs (busy() false and no job
  /// queued) or after shutdown(): it belongs to the worker thread.
  Rack* rack() { return rack_.get(); }
  /// How the last series ended (read after series_finished).
  const series::SeriesOutcome& last_outcome() const { return outcome_; }
  /// The series with masses after weighing_done.
  const series::Series& weighed_series() const { return weighed_; }

 signals:
  void rack_opened(bool ok, const QString& message, bool simulated);
  void role_answered(int role, bool ok, const QString& text);
  void connections_tested();
  /// pH is NaN when the meter reports none.
  void sensor_read(double potential_mv, double temperature_c, double ph, double clock_s);
  void sensor_failed(const QString& message);

  void series_started(const QString& name, int entries);
  void entry_started(const QString& kind, const QString& label);
  void entry_ended(const QString& label, const QString& status, const QString& note);
  void determination_stored(int position, double value, const QString& unit, bool counted,
                            const QString& flags);
  /// A new run begins (its first point follows).
  void run_started(const QString& label);
  void point_measured(qint64 index, double volume_ml, double signal, double drift_per_min,
                      double time_s);
  void run_state_changed(const QString& from, const QString& to, const QString& reason);
  void run_message(const QString& text);
  /// The endpoints of the run just evaluated (mL), and its signal unit.
  void endpoints_found(const QList<double>& volumes_ml, const QString& signal_unit);
  void paused_between_vessels(bool waiting);
  void series_finished(const QString& status, const QString& reason);

  void weighing_instruction(const QString& text);
  void weighing_done(int weighed, int failed, const QString& notes);

  /// A job could not be done (no rack, a store that does not open...).
  void problem(const QString& message);

 private:
  class Observer;
  void post(std::function<void()> job);
  void loop();
  /// Runs on the GUI thread (queued to this object).
  void emit_later(std::function<void()> f);
  void wait_while_paused();

  std::unique_ptr<Rack> rack_;
  std::mutex mutex_;
  std::condition_variable wake_;
  std::deque<std::function<void()>> jobs_;
  bool stopping_ = false;
  std::thread thread_;
  std::vector<std::thread> stoppers_;

  std::atomic<bool> abort_{false};
  std::atomic<bool> pause_{false};
  std::atomic<bool> busy_{false};
  std::atomic<bool> reading_{false};
  std::atomic<bool> weighing_go_{false};
  std::mutex pause_mutex_;
  std::condition_variable pause_wake_;

  series::SeriesOutcome outcome_;
  series::Series weighed_;
};

}  // namespace veq::ui
