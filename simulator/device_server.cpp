#include "simulator/device_server.hpp"

#include <array>
#include <deque>
#include <future>
#include <map>
#include <mutex>
#include <optional>
#include <thread>

#include <boost/asio/executor_work_guard.hpp>
#include <boost/asio/io_context.hpp>
#include <boost/asio/ip/tcp.hpp>
#include <boost/asio/posix/stream_descriptor.hpp>
#include <boost/asio/post.hpp>
#include <boost/asio/steady_timer.hpp>
#include <boost/asio/write.hpp>

#include "drivers/pseudo_terminal.hpp"

namespace veq::simulator {

namespace asio = boost::asio;
using asio::ip::tcp;

// A named namespace, not an anonymous one: DeviceServer::Impl holds Lines,
// and a class with a member of internal linkage draws a warning when files
// are compiled together (unity builds).
namespace device_server_lines {

/// One served device and its line (a pseudo-terminal master or a TCP socket).
struct Line {
  Line(std::string line_name, drivers::ByteDevice& served, asio::io_context& io)
      : name(std::move(line_name)), device(served), timer(io) {}

  std::string name;
  drivers::ByteDevice& device;
  asio::steady_timer timer;  ///< next streamed reading
  std::array<char, 1024> input{};
  std::deque<std::string> output;
  bool writing = false;
  // Pseudo-terminal
  std::optional<drivers::PseudoTerminal> pty;
  std::optional<asio::posix::stream_descriptor> master;
  // TCP
  std::optional<tcp::acceptor> acceptor;
  std::optional<tcp::socket> socket;
  bool refusing = false;
  /// Counts connections: a handler of a closed connection must not touch
  /// the next one, which may sit at the same address.
  std::uint64_t session = 0;
};

}  // namespace device_server_lines

using device_server_lines::Line;

class DeviceServer::Impl {
 public:
  explicit Impl(drivers::ScaledClock& clock) : clock_(clock), work_(asio::make_work_guard(io_)) {}
  ~Impl() { stop(); }

  Result<std::string> add_pty(const std::string& name, drivers::ByteDevice& device) {
    auto pty = drivers::PseudoTerminal::open();
    if (!pty)
      return pty.error();
    auto line = std::make_unique<Line>(name, device, io_);
    line->pty.emplace(std::move(pty).value());
    line->master.emplace(io_, line->pty->release_master());
    const std::string connection = "serial:" + line->pty->slave_path();
    lines_[name] = std::move(line);
    return connection;
  }

  Result<std::string> add_tcp(const std::string& name, drivers::ByteDevice& device) {
    auto line = std::make_unique<Line>(name, device, io_);
    boost::system::error_code ec;
    line->acceptor.emplace(io_);
    const tcp::endpoint local(asio::ip::address_v4::loopback(), 0);
    line->acceptor->open(local.protocol(), ec);
    if (!ec)
      line->acceptor->set_option(tcp::acceptor::reuse_address(true), ec);
    if (!ec)
      line->acceptor->bind(local, ec);
    if (!ec)
      line->acceptor->listen(asio::socket_base::max_listen_connections, ec);
    if (ec) {
      return make_error(ErrorKind::io, "device server: cannot listen on 127.0.0.1 for " + name +
                                           " (" + ec.message() + ")");
    }
    const auto port = line->acceptor->local_endpoint().port();
    lines_[name] = std::move(line);
    return "tcp:127.0.0.1:" + std::to_string(port);
  }

  void run() {
    for (auto& [name, line] : lines_) {
      if (line->master)
        read_pty(*line);
      if (line->acceptor)
        accept(*line);
      schedule_stream(*line);
    }
    thread_ = std::thread([this] { io_.run(); });
  }

  void stop() {
    std::lock_guard lock(stop_mutex_);
    if (!thread_.joinable())
      return;
    asio::post(io_, [this] {
      for (auto& [name, line] : lines_)
        close(*line, true);
      work_.reset();
    });
    thread_.join();
  }

  void on_thread(const std::function<void()>& task) {
    if (!thread_.joinable() || io_.stopped()) {
      task();
      return;
    }
    std::promise<void> done;
    auto finished = done.get_future();
    asio::post(io_, [&] {
      try {
        task();
        done.set_value();
      } catch (...) {
        done.set_exception(std::current_exception());
      }
    });
    finished.get();
  }

  void pull(const std::string& name) {
    on_thread([&] {
      if (auto* line = find(name))
        close(*line, false);
    });
  }

  void pull_soon(const std::string& name) {
    asio::post(io_, [this, name] {
      if (auto* line = find(name))
        close(*line, false);
    });
  }

  void refuse(const std::string& name, bool refuse) {
    on_thread([&] {
      if (auto* line = find(name)) {
        line->refusing = refuse;
        if (refuse && line->socket)
          close(*line, false);
      }
    });
  }

  std::vector<std::string> problems() const {
    std::lock_guard lock(problems_mutex_);
    return problems_;
  }

 private:
  Line* find(const std::string& name) {
    auto it = lines_.find(name);
    return it == lines_.end() ? nullptr : it->second.get();
  }

  void note(std::string problem) {
    std::lock_guard lock(problems_mutex_);
    problems_.push_back(std::move(problem));
  }

  /// Closes a line's connection; `for_good` also stops a TCP listener.
  void close(Line& line, bool for_good) {
    boost::system::error_code ignored;
    if (line.master)
      line.master->close(ignored);
    if (line.socket) {
      line.socket->close(ignored);
      line.socket.reset();
    }
    ++line.session;
    line.output.clear();
    line.writing = false;
    if (for_good) {
      line.timer.cancel();
      if (line.acceptor)
        line.acceptor->close(ignored);
    }
  }

  std::string serve(Line& line, std::string_view bytes) {
    try {
      return line.device.receive(bytes);
    } catch (const std::exception& e) {
      // A device that throws is a bug in the simulator: the host sees
      // silence (a timeout) and the problem is kept for the report.
      note(line.name + ": " + e.what());
      return {};
    }
  }

  void read_pty(Line& line) {
    line.master->async_read_some(
        asio::buffer(line.input),
        [this, &line](const boost::system::error_code& ec, std::size_t n) {
          if (ec) {
            if (ec != asio::error::operation_aborted && ec != asio::error::bad_descriptor)
              note(line.name + " line: " + ec.message() + "; no longer served");
            return;
          }
          send(line, serve(line, std::string_view(line.input.data(), n)));
          schedule_stream(line);
          read_pty(line);
        });
  }

  void accept(Line& line) {
    line.acceptor->async_accept(
        [this, &line](const boost::system::error_code& ec, tcp::socket socket) {
          if (ec)
            return;  // the listener was closed
          boost::system::error_code ignored;
          if (line.refusing || line.socket) {
            // One host at a time; a refusing converter hangs up at once.
            socket.close(ignored);
          } else {
            socket.set_option(tcp::no_delay(true), ignored);
            line.socket.emplace(std::move(socket));
            read_tcp(line);
          }
          accept(line);
        });
  }

  void read_tcp(Line& line) {
    const std::uint64_t session = line.session;
    line.socket->async_read_some(
        asio::buffer(line.input),
        [this, &line, session](const boost::system::error_code& ec, std::size_t n) {
          if (session != line.session)
            return;  // a connection closed since; its successor has its own reads
          if (ec) {
            // The host went: wait for the next one.
            close(line, false);
            return;
          }
          send(line, serve(line, std::string_view(line.input.data(), n)));
          schedule_stream(line);
          read_tcp(line);
        });
  }

  void send(Line& line, std::string bytes) {
    if (bytes.empty())
      return;
    if (!(line.master && line.master->is_open()) && !line.socket)
      return;  // nobody listening: the bytes are lost, as on a pulled cable
    line.output.push_back(std::move(bytes));
    write(line);
  }

  void write(Line& line) {
    if (line.writing || line.output.empty())
      return;
    line.writing = true;
    const std::uint64_t session = line.session;
    auto done = [this, &line, session](const boost::system::error_code& ec, std::size_t) {
      if (session != line.session)
        return;  // the line was closed meanwhile
      line.writing = false;
      if (!line.output.empty())
        line.output.pop_front();
      if (ec) {
        line.output.clear();
        return;
      }
      write(line);
    };
    if (line.master && line.master->is_open()) {
      asio::async_write(*line.master, asio::buffer(line.output.front()), done);
    } else if (line.socket) {
      asio::async_write(*line.socket, asio::buffer(line.output.front()), done);
    } else {
      line.writing = false;
      line.output.clear();
    }
  }

  /// Arms the timer for the device's next streamed reading, if any.
  void schedule_stream(Line& line) {
    const auto due = line.device.next_unsolicited_at();
    if (!due) {
      line.timer.cancel();
      return;
    }
    const auto wait =
        *due > clock_.now() ? clock_.to_real(*due - clock_.now()) : drivers::Duration::zero();
    line.timer.expires_after(wait);
    line.timer.async_wait([this, &line](const boost::system::error_code& ec) {
      if (ec)
        return;
      std::string bytes;
      try {
        bytes = line.device.unsolicited();
      } catch (const std::exception& e) {
        note(line.name + " (streamed reading): " + e.what());
      }
      send(line, std::move(bytes));
      schedule_stream(line);
    });
  }

  drivers::ScaledClock& clock_;
  asio::io_context io_;
  asio::executor_work_guard<asio::io_context::executor_type> work_;
  std::map<std::string, std::unique_ptr<Line>> lines_;
  std::thread thread_;
  std::mutex stop_mutex_;
  mutable std::mutex problems_mutex_;
  std::vector<std::string> problems_;
};

DeviceServer::DeviceServer(double time_scale)
    : clock_(time_scale), impl_(std::make_unique<Impl>(clock_)) {}

DeviceServer::~DeviceServer() {
  stop();
}

Result<std::string> DeviceServer::serve_on_pseudo_terminal(const std::string& name,
                                                           drivers::ByteDevice& device) {
  return impl_->add_pty(name, device);
}

Result<std::string> DeviceServer::serve_on_tcp(const std::string& name,
                                               drivers::ByteDevice& device) {
  return impl_->add_tcp(name, device);
}

void DeviceServer::run() {
  impl_->run();
}
void DeviceServer::pull(const std::string& name) {
  impl_->pull(name);
}
void DeviceServer::pull_soon(const std::string& name) {
  impl_->pull_soon(name);
}
void DeviceServer::refuse_connections(const std::string& name, bool refuse) {
  impl_->refuse(name, refuse);
}
void DeviceServer::with_devices(const std::function<void()>& inspect) {
  impl_->on_thread(inspect);
}
void DeviceServer::stop() {
  impl_->stop();
}
std::vector<std::string> DeviceServer::problems() const {
  return impl_->problems();
}

}  // namespace veq::simulator
