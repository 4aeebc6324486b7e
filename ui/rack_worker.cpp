#include "ui/rack_worker.hpp"

#include <cmath>
#include <exception>
#include <limits>

#include <QtCore/QMetaObject>

#include "controller/cli/stop_after_interruption.hpp"
#include "controller/series/series_file.hpp"
#include "controller/series/weighing.hpp"
#include "controller/store/sqlite_store.hpp"

namespace veq::ui {

namespace {

QString q(const std::string& s) {
  return QString::fromStdString(s);
}

/// Thrown out of the weighing's instruction callback when the operator
/// aborts; never leaves the worker's job.
struct WeighingCancelled {};

}  // namespace

/// Hears the series on the worker thread and posts every event to the GUI.
class RackWorker::Observer final : public series::SeriesObserver {
 public:
  Observer(RackWorker& worker, store::RunStore& runs) : worker_(worker), runs_(runs) {}

  void on_entry(const std::string& kind, const std::string& label) override {
    worker_.wait_while_paused();
    label_ = label;
    worker_.emit_later([w = &worker_, k = q(kind), l = q(label)] { emit w->entry_started(k, l); });
  }
  void on_entry_end(const std::string& label, const std::string& status,
                    const std::string& note) override {
    worker_.emit_later(
        [w = &worker_, l = q(label), s = q(status), n = q(note)] { emit w->entry_ended(l, s, n); });
  }
  void on_determination(const store::DeterminationRecord& d) override {
    worker_.emit_later([w = &worker_, d] {
      emit w->determination_stored(d.position, d.value, q(d.unit), d.counted, q(d.flags));
    });
    // The endpoints of the run that gave the value (the back-titration's
    // when there is one), as the evaluation stored them.
    const std::int64_t run_id = d.second_run_id != 0 ? d.second_run_id : d.run_id;
    if (run_id != 0) {
      if (auto evaluations = runs_.load_evaluations(run_id); evaluations && !evaluations->empty()) {
        QList<double> volumes;
        for (const auto& e : evaluations->back().endpoints)
          volumes.append(e.volume_ml);
        worker_.emit_later([w = &worker_, volumes] { emit w->endpoints_found(volumes, "mV"); });
      }
    }
    // A vessel is finished: a pause takes effect here.
    worker_.wait_while_paused();
  }
  void on_point(const store::PointRecord& p) override {
    worker_.emit_later([w = &worker_, p] {
      emit w->point_measured(p.index, p.volume_ml, p.signal, p.drift_per_min, p.time_s);
    });
  }
  void on_message(const std::string& text) override {
    worker_.emit_later([w = &worker_, t = q(text)] { emit w->run_message(t); });
  }
  void on_state(controller::RunState from, controller::RunState to,
                const std::string& reason) override {
    if (to == controller::RunState::preparing)
      worker_.emit_later([w = &worker_, l = q(label_)] { emit w->run_started(l); });
    worker_.emit_later([w = &worker_, f = QString(controller::run_state_name(from)),
                        t = QString(controller::run_state_name(to)),
                        r = q(reason)] { emit w->run_state_changed(f, t, r); });
  }

 private:
  RackWorker& worker_;
  store::RunStore& runs_;
  std::string label_;
};

RackWorker::RackWorker(QObject* parent) : QObject(parent) {
  thread_ = std::thread([this] { loop(); });
}

RackWorker::~RackWorker() {
  shutdown();
}

void RackWorker::emit_later(std::function<void()> f) {
  // Runs in this object's thread (the GUI's); dropped if the object is gone.
  QMetaObject::invokeMethod(this, std::move(f), Qt::QueuedConnection);
}

void RackWorker::post(std::function<void()> job) {
  {
    std::lock_guard lock(mutex_);
    if (stopping_)
      return;
    jobs_.push_back(std::move(job));
  }
  wake_.notify_one();
}

void RackWorker::loop() {
  while (true) {
    std::function<void()> job;
    {
      std::unique_lock lock(mutex_);
      wake_.wait(lock, [this] { return stopping_ || !jobs_.empty(); });
      if (jobs_.empty())
        return;  // stopping, nothing left
      job = std::move(jobs_.front());
      jobs_.pop_front();
    }
    // Everything is caught at the thread's edge and handed to the window.
    try {
      job();
    } catch (const std::exception& e) {
      emit_later([this, m = QString::fromUtf8(e.what())] {
        emit problem("the instrument worker stopped a task: " + m);
      });
    }
  }
}

void RackWorker::open(const RackSettings& settings) {
  if (busy()) {
    emit problem("a series is running: abort it before changing the instruments");
    return;
  }
  post([this, settings] {
    rack_.reset();
    auto opened = open_rack(settings);
    if (!opened) {
      emit_later([this, m = q(opened.error().describe())] { emit rack_opened(false, m, false); });
      return;
    }
    rack_ = std::move(opened).value();
    const bool simulated = rack_->simulated();
    QString text =
        simulated ? "simulated instruments ready (demo rack, virtual time)" : "instruments opened";
    if (!rack_->missing().empty())
      text += "; " + q(rack_->missing());
    emit_later([this, text, simulated] { emit rack_opened(true, text, simulated); });
  });
}

void RackWorker::test_connections() {
  post([this] {
    if (!rack_) {
      emit_later([this] { emit problem("no instruments are open: apply the connections first"); });
      return;
    }
    for (const auto& a : rack_->identify_all()) {
      emit_later([this, a] { emit role_answered(static_cast<int>(a.role), a.ok, q(a.text)); });
    }
    emit_later([this] { emit connections_tested(); });
  });
}

void RackWorker::read_sensor(double advance_s) {
  if (busy() || reading_.exchange(true))
    return;
  post([this, advance_s] {
    Result<SensorReading> r = rack_ ? rack_->read_sensor(advance_s)
                                    : Result<SensorReading>(make_error(ErrorKind::invalid_input,
                                                                       "no instruments are open"));
    reading_.store(false);
    if (!r) {
      emit_later([this, m = q(r.error().describe())] { emit sensor_failed(m); });
      return;
    }
    const double ph = r->ph ? *r->ph : std::numeric_limits<double>::quiet_NaN();
    emit_later(
        [this, v = *r, ph] { emit sensor_read(v.potential_mv, v.temperature_c, ph, v.clock_s); });
  });
}

void RackWorker::start_series(const series::Series& s, const std::string& database_path,
                              bool prepare_demo) {
  if (busy()) {
    emit problem("a series is already running");
    return;
  }
  busy_.store(true);
  abort_.store(false);
  pause_.store(false);
  post([this, s, database_path, prepare_demo] {
    auto fail = [this](const std::string& message) {
      busy_.store(false);
      emit_later([this, m = q(message)] {
        emit problem(m);
        emit series_finished("not started", m);
      });
    };
    if (!rack_) {
      fail("no instruments are open: choose them on the Instruments view and apply");
      return;
    }
    if (rack_->instruments() == nullptr) {
      fail("the series cannot start: " + rack_->missing());
      return;
    }
    auto opened = store::SqliteStore::open(database_path);
    if (!opened) {
      fail("the series cannot start: " + opened.error().describe());
      return;
    }
    auto& db = **opened;
    if (prepare_demo) {
      if (auto prepared = prepare_demo_records(db); !prepared) {
        fail("the demo records could not be stored: " + prepared.error().describe());
        return;
      }
    }
    // A run cut off by a crash may have left a burette dosing: every burette
    // is told to stop before anything else while a stop is owed.
    auto stopped = cli::stop_burettes_after_interruption(*rack_->instruments(), db);
    if (!stopped) {
      fail("the series cannot start: " + stopped.error().message);
      return;
    }
    for (const auto& line : *stopped)
      emit_later([this, t = q(line)] { emit run_message(t); });
    // The clients must know their limits before a series (series_runner.hpp).
    for (const auto& a : rack_->identify_all()) {
      if (!a.ok) {
        fail(std::string(bench_role_name(a.role)) + " does not answer: " + a.text);
        return;
      }
    }
    emit_later([this, n = q(s.name), count = static_cast<int>(s.entries.size())] {
      emit series_started(n, count);
    });
    series::SeriesStores stores{db, db, db};
    Observer observer(*this, db);
    series::SeriesOutcome outcome;
    try {
      outcome = series::run_series(s, series::write_series(s), *rack_->instruments(), stores, {},
                                   &observer, &abort_);
    } catch (const std::exception& e) {
      for (auto* b : rack_->burettes())
        (void)b->stop();
      outcome.status = store::SeriesStatus::stopped;
      outcome.reason = std::string("internal error: ") + e.what();
    }
    if (!outcome.burettes_stopped)
      outcome.reason +=
          "; WARNING: a burette did not confirm its stop: check it before the "
          "next series";
    outcome_ = outcome;
    busy_.store(false);
    emit_later([this, st = QString(store::series_status_name(outcome.status)),
                r = q(outcome.reason)] { emit series_finished(st, r); });
  });
}

void RackWorker::weigh(const series::Series& s) {
  if (busy()) {
    emit problem("a series is running: weigh before it starts");
    return;
  }
  busy_.store(true);
  abort_.store(false);
  weighing_go_.store(false);
  post([this, s] {
    weighed_ = s;
    drivers::BalanceClient* balance =
        rack_ && rack_->instruments() ? rack_->instruments()->balance : nullptr;
    if (!balance) {
      busy_.store(false);
      emit_later([this] {
        emit weighing_done(0, 0,
                           "no balance is connected: give it a connection on the "
                           "Instruments view");
      });
      return;
    }
    simulator::SimulatedBench* bench = rack_->bench();
    double on_pan_g = 0.0;
    int portion = 0;
    auto ask = [&](const std::string& instruction) {
      emit_later([this, t = q(instruction)] { emit weighing_instruction(t); });
      {
        std::unique_lock lock(pause_mutex_);
        pause_wake_.wait(lock, [this] { return weighing_go_.load() || abort_.load(); });
        weighing_go_.store(false);
      }
      // An abort (closing the window) ends the weighing here, before the
      // next wait for a settled pan, which may take the balance's whole
      // stable timeout. Caught below: weigh_portions holds nothing that
      // needs undoing (the series copy is discarded).
      if (abort_.load())
        throw WeighingCancelled{};
      if (bench != nullptr) {
        // On the simulated bench nobody's hands can reach the pan: veq puts
        // a 50 g beaker on it and then a portion near 0.25 g (invented,
        // different for each portion), as the instructions say.
        if (instruction.rfind("Put the empty vessel", 0) == 0) {
          bench->balance().place(-on_pan_g);
          bench->balance().place(50.0);
          on_pan_g = 50.0;
        } else {
          const double mass_g = 0.2400 + 0.0037 * static_cast<double>(portion++ % 7);
          bench->balance().place(mass_g);
          on_pan_g += mass_g;
        }
      }
    };
    series::WeighingOutcome outcome;
    try {
      outcome = series::weigh_portions(weighed_, *balance, rack_->clock(), ask);
    } catch (const WeighingCancelled&) {
      weighed_ = s;
      outcome = {};
      outcome.notes.push_back("weighing cancelled; no mass was written");
    }
    if (bench != nullptr)
      bench->balance().place(-on_pan_g);
    busy_.store(false);
    QString notes;
    for (const auto& n : outcome.notes)
      notes += q(n) + "\n";
    emit_later([this, w = outcome.weighed, f = outcome.failed, notes] {
      emit weighing_done(w, f, notes.trimmed());
    });
  });
}

void RackWorker::continue_weighing() {
  {
    std::lock_guard lock(pause_mutex_);
    weighing_go_.store(true);
  }
  pause_wake_.notify_all();
}

void RackWorker::set_paused(bool paused) {
  {
    std::lock_guard lock(pause_mutex_);
    pause_.store(paused);
  }
  pause_wake_.notify_all();
}

void RackWorker::wait_while_paused() {
  std::unique_lock lock(pause_mutex_);
  if (!pause_.load() || abort_.load())
    return;
  emit_later([this] { emit paused_between_vessels(true); });
  pause_wake_.wait(lock, [this] { return !pause_.load() || abort_.load(); });
  emit_later([this] { emit paused_between_vessels(false); });
}

void RackWorker::abort() {
  {
    std::lock_guard lock(pause_mutex_);
    abort_.store(true);
  }
  pause_wake_.notify_all();
  if (!busy())
    return;
  // Real burettes stop now, not at the series' next step. Their links
  // serialise exchanges, so the stop goes out right after the one in
  // flight. The simulated bench answers inside each call on the worker
  // thread and is not shared between threads: there the series' own stop,
  // microseconds later in wall time, is the stop.
  if (rack_ && !rack_->simulated()) {
    std::vector<drivers::BuretteClient*> burettes = rack_->burettes();
    stoppers_.emplace_back([burettes] {
      for (auto* b : burettes)
        (void)b->stop();
    });
  }
}

void RackWorker::shutdown() {
  abort();
  {
    std::lock_guard lock(mutex_);
    stopping_ = true;
    // Jobs not yet started are dropped; the one running ends at its next
    // step because of the abort.
    jobs_.clear();
  }
  wake_.notify_all();
  if (thread_.joinable())
    thread_.join();
  for (auto& t : stoppers_)
    if (t.joinable())
      t.join();
  stoppers_.clear();
  busy_.store(false);
}

}  // namespace veq::ui
