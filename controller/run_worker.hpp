// A titration on its own worker thread, so that a window or a terminal stays
// responsive and an operator can abort at any moment.
#pragma once

#include <atomic>
#include <functional>
#include <future>
#include <thread>

#include "controller/titration.hpp"

namespace veq::controller {

/// Runs one titration on a worker thread. The instruments, store, sample,
/// method and observer must outlive the worker. The observer is called on the
/// worker thread.
class RunWorker {
 public:
  RunWorker(Instruments& instruments, store::RunStore& store, SampleDescription sample,
            TitrationMethod method, RunObserver* observer = nullptr);
  /// Aborts a run still going and joins the thread: a worker never outlives
  /// its owner and never leaves the burette dosing.
  ~RunWorker();
  RunWorker(const RunWorker&) = delete;
  RunWorker& operator=(const RunWorker&) = delete;

  void start();
  /// Stops the burette at once (from the calling thread, right after any
  /// exchange in flight) and makes the run end as aborted at its next step.
  void abort();
  /// Holds the run at its next step (the burette is idle between steps) and
  /// lets it go on.
  void pause() { control_.pause.store(true); }
  void resume() { control_.pause.store(false); }
  /// Waits for the run to end and returns how it ended.
  RunOutcome wait();
  bool finished() const { return finished_.load(); }

 private:
  Instruments& instruments_;
  store::RunStore& store_;
  SampleDescription sample_;
  TitrationMethod method_;
  RunObserver* observer_;
  RunControl control_;
  std::atomic<bool> finished_{false};
  std::promise<RunOutcome> promise_;
  std::future<RunOutcome> future_;
  std::thread thread_;
  bool waited_ = false;
  RunOutcome outcome_;
};

}  // namespace veq::controller
