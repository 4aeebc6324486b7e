#include "simulator/pseudo_terminal_bench.hpp"

#include <array>
#include <cmath>
#include <deque>
#include <future>
#include <mutex>
#include <thread>
#include <utility>
#include <vector>

#include <boost/asio/executor_work_guard.hpp>
#include <boost/asio/io_context.hpp>
#include <boost/asio/posix/stream_descriptor.hpp>
#include <boost/asio/post.hpp>
#include <boost/asio/steady_timer.hpp>
#include <boost/asio/write.hpp>

#include "drivers/clock.hpp"
#include "drivers/pseudo_terminal.hpp"

namespace veq::simulator {

namespace asio = boost::asio;

/// One device at the master end of one pseudo-terminal.
struct ServedLine {
  ServedLine(std::string line_name, drivers::PseudoTerminal terminal, asio::io_context& io,
             drivers::ByteDevice& served)
      : name(std::move(line_name)),
        pty(std::move(terminal)),
        master(io, pty.release_master()),
        device(served),
        stream_timer(io) {}

  std::string name;
  drivers::PseudoTerminal pty;  ///< keeps the slave side open (see PseudoTerminal)
  asio::posix::stream_descriptor master;
  drivers::ByteDevice& device;
  std::array<char, 1024> input{};
  std::deque<std::string> output;
  bool writing = false;
  asio::steady_timer stream_timer;  ///< the device's next streamed reading
};

class PseudoTerminalBench::Impl {
 public:
  Impl(const Scenario& scenario, double time_scale, drivers::PseudoTerminal burette_pty,
       drivers::PseudoTerminal electrode_pty)
      : clock_(time_scale),
        bench_(scenario, clock_),
        work_(asio::make_work_guard(io_)),
        burette_("burette", std::move(burette_pty), io_, bench_.burette()),
        electrode_("electrode", std::move(electrode_pty), io_, bench_.electrode()),
        burette_port_(burette_.pty.slave_path()),
        electrode_port_(electrode_.pty.slave_path()) {
    // A disconnect fault closes the device's own port, later on the serving
    // thread (the device asks while it is answering on that thread).
    bench_.burette().on_disconnect([this] { asio::post(io_, [this] { close(burette_); }); });
    bench_.electrode().on_disconnect([this] { asio::post(io_, [this] { close(electrode_); }); });
  }

  ~Impl() { stop(); }

  void run() {
    read(burette_);
    read(electrode_);
    thread_ = std::thread([this] { io_.run(); });
  }

  void stop() {
    std::lock_guard lock(stop_mutex_);
    if (!thread_.joinable())
      return;
    // Closing the masters on the serving thread cancels their pending reads;
    // then the work guard goes and run() returns.
    asio::post(io_, [this] {
      close(burette_);
      close(electrode_);
      work_.reset();
    });
    thread_.join();
  }

  void with_bench(const std::function<void(SimulatedBench&)>& inspect) {
    if (!serving()) {
      inspect(bench_);
      return;
    }
    std::promise<void> done;
    auto finished = done.get_future();
    asio::post(io_, [&] {
      try {
        inspect(bench_);
        done.set_value();
      } catch (...) {
        done.set_exception(std::current_exception());
      }
    });
    finished.get();
  }

  void disconnect() {
    with_bench([this](SimulatedBench&) {
      close(burette_);
      close(electrode_);
    });
  }

  std::vector<std::string> problems() const {
    std::lock_guard lock(problems_mutex_);
    return problems_;
  }

  drivers::ScaledClock clock_;
  SimulatedBench bench_;
  asio::io_context io_;
  asio::executor_work_guard<asio::io_context::executor_type> work_;
  ServedLine burette_;
  ServedLine electrode_;
  const std::string burette_port_;
  const std::string electrode_port_;

 private:
  bool serving() const { return thread_.joinable() && !io_.stopped(); }

  void note(std::string problem) {
    std::lock_guard lock(problems_mutex_);
    problems_.push_back(std::move(problem));
  }

  void close(ServedLine& line) {
    boost::system::error_code ignored;
    line.master.close(ignored);
    line.stream_timer.cancel();
  }

  /// Arms the timer for the device's next streamed reading (a meter asked to
  /// stream sends on its own), converting device time to real time.
  void schedule_stream(ServedLine& line) {
    const auto due = line.device.next_unsolicited_at();
    if (!due || !line.master.is_open()) {
      line.stream_timer.cancel();
      return;
    }
    const auto wait =
        *due > clock_.now() ? clock_.to_real(*due - clock_.now()) : drivers::Duration::zero();
    line.stream_timer.expires_after(wait);
    line.stream_timer.async_wait([this, &line](const boost::system::error_code& ec) {
      if (ec || !line.master.is_open())
        return;
      std::string bytes;
      try {
        bytes = line.device.unsolicited();
      } catch (const std::exception& e) {
        note(line.name + " (streamed reading): " + e.what());
      }
      if (!bytes.empty()) {
        line.output.push_back(std::move(bytes));
        write(line);
      }
      schedule_stream(line);
    });
  }

  void read(ServedLine& line) {
    line.master.async_read_some(
        asio::buffer(line.input),
        [this, &line](const boost::system::error_code& ec, std::size_t n) {
          if (ec) {
            // operation_aborted and bad_descriptor: the line was closed on
            // purpose (stop, disconnect). Anything else ends this line.
            if (ec != asio::error::operation_aborted && ec != asio::error::bad_descriptor)
              note(line.name + " line: " + ec.message() + "; no longer served");
            return;
          }
          std::string reply;
          try {
            reply = line.device.receive(std::string_view(line.input.data(), n));
          } catch (const std::exception& e) {
            // A device that throws is a bug in the simulator; the host sees
            // silence (a timeout) and the problem is kept for the report.
            note(line.name + ": " + e.what());
          }
          if (!reply.empty()) {
            line.output.push_back(std::move(reply));
            write(line);
          }
          schedule_stream(line);
          read(line);
        });
  }

  void write(ServedLine& line) {
    if (line.writing || line.output.empty())
      return;
    line.writing = true;
    asio::async_write(
        line.master, asio::buffer(line.output.front()),
        [this, &line](const boost::system::error_code& ec, std::size_t) {
          line.writing = false;
          line.output.pop_front();
          if (ec) {
            if (ec != asio::error::operation_aborted && ec != asio::error::bad_descriptor)
              note(line.name + " line: " + ec.message() + " while answering");
            line.output.clear();
            return;
          }
          write(line);
        });
  }

  std::thread thread_;
  std::mutex stop_mutex_;
  mutable std::mutex problems_mutex_;
  std::vector<std::string> problems_;
};

Result<std::unique_ptr<PseudoTerminalBench>> PseudoTerminalBench::start(
    const Scenario& scenario, const PseudoTerminalBenchOptions& options) {
  if (!std::isfinite(options.time_scale) || options.time_scale <= 0.0) {
    return make_error(ErrorKind::invalid_input, "time scale " + std::to_string(options.time_scale) +
                                                    " is not a number above 0");
  }
  auto burette = drivers::PseudoTerminal::open();
  if (!burette)
    return burette.error();
  auto electrode = drivers::PseudoTerminal::open();
  if (!electrode)
    return electrode.error();
  auto impl = std::make_unique<Impl>(scenario, options.time_scale, std::move(burette).value(),
                                     std::move(electrode).value());
  impl->run();
  return std::unique_ptr<PseudoTerminalBench>(new PseudoTerminalBench(std::move(impl)));
}

PseudoTerminalBench::PseudoTerminalBench(std::unique_ptr<Impl> impl) : impl_(std::move(impl)) {}
PseudoTerminalBench::~PseudoTerminalBench() = default;

const std::string& PseudoTerminalBench::burette_port() const {
  return impl_->burette_port_;
}
const std::string& PseudoTerminalBench::electrode_port() const {
  return impl_->electrode_port_;
}
double PseudoTerminalBench::time_scale() const {
  return impl_->clock_.time_scale();
}
const Scenario& PseudoTerminalBench::scenario() const {
  return impl_->bench_.scenario();
}
double PseudoTerminalBench::true_equivalence_reading_ml() const {
  // Under the bench's lock: the serving thread moves the burette meanwhile
  // (ThreadSanitizer found the unlocked read).
  double reading = 0.0;
  impl_->with_bench([&reading](SimulatedBench& b) { reading = b.true_equivalence_reading_ml(); });
  return reading;
}

void PseudoTerminalBench::set_burette_fault(FaultPlan plan) {
  impl_->with_bench([plan](SimulatedBench& b) { b.burette().set_fault(plan); });
}
void PseudoTerminalBench::set_electrode_fault(FaultPlan plan) {
  impl_->with_bench([plan](SimulatedBench& b) { b.electrode().set_fault(plan); });
}
void PseudoTerminalBench::with_bench(const std::function<void(SimulatedBench&)>& inspect) {
  impl_->with_bench(inspect);
}
void PseudoTerminalBench::disconnect() {
  impl_->disconnect();
}
void PseudoTerminalBench::stop() {
  impl_->stop();
}
std::vector<std::string> PseudoTerminalBench::problems() const {
  return impl_->problems();
}

}  // namespace veq::simulator
