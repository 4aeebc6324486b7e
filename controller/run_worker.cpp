#include "controller/run_worker.hpp"

#include <utility>

namespace veq::controller {

RunWorker::RunWorker(Instruments& instruments, store::RunStore& store, SampleDescription sample,
                     TitrationMethod method, RunObserver* observer)
    : instruments_(instruments),
      store_(store),
      sample_(std::move(sample)),
      method_(std::move(method)),
      observer_(observer),
      future_(promise_.get_future()) {}

RunWorker::~RunWorker() {
  if (thread_.joinable()) {
    if (!finished_.load())
      abort();
    thread_.join();
  }
}

void RunWorker::start() {
  thread_ = std::thread([this] {
    // Everything is caught at the thread's edge and handed over as an outcome.
    RunOutcome outcome;
    try {
      outcome = run_titration(instruments_, store_, sample_, method_, observer_, &control_);
    } catch (const std::exception& e) {
      (void)instruments_.burette.stop();
      outcome.status = store::RunStatus::failed;
      outcome.reason = std::string("internal error: ") + e.what();
    }
    finished_.store(true);
    promise_.set_value(std::move(outcome));
  });
}

void RunWorker::abort() {
  control_.abort.store(true);
  // Do not wait for the run to notice: stop the motor now.
  (void)instruments_.burette.stop();
}

RunOutcome RunWorker::wait() {
  if (!waited_) {
    outcome_ = future_.get();
    waited_ = true;
    if (thread_.joinable())
      thread_.join();
  }
  return outcome_;
}

}  // namespace veq::controller
