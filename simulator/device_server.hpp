// Virtual instruments served in real time (optionally faster, by a
// time-scale factor) over real lines: pseudo-terminals, which a host opens as
// serial ports, and TCP listeners on 127.0.0.1, which a host reaches as it
// would a serial-to-network converter. Any number of devices share one
// io_context on one serving thread; streamed readings go out on timers.
#pragma once

#include <functional>
#include <memory>
#include <string>
#include <vector>

#include "common/result.hpp"
#include "drivers/clock.hpp"
#include "drivers/memory_transport.hpp"

namespace veq::simulator {

class DeviceServer {
 public:
  /// time_scale: device seconds per real second (> 0); devices served here
  /// must be built on clock(). Throws std::invalid_argument otherwise (a
  /// programming error; users' values are checked where they are read).
  explicit DeviceServer(double time_scale = 1.0);
  /// stop()
  ~DeviceServer();
  DeviceServer(const DeviceServer&) = delete;
  DeviceServer& operator=(const DeviceServer&) = delete;

  /// The clock the served devices must run on.
  drivers::ScaledClock& clock() { return clock_; }

  /// Serves `device` (which must outlive the server) on a new
  /// pseudo-terminal; returns the host's connection string "serial:<path>".
  /// Call before run().
  Result<std::string> serve_on_pseudo_terminal(const std::string& name,
                                               drivers::ByteDevice& device);
  /// Serves `device` on a TCP listener on 127.0.0.1 with a port the system
  /// chooses; returns "tcp:127.0.0.1:<port>". One host at a time: when it
  /// goes (or is pulled), the next connection is accepted. Call before run().
  Result<std::string> serve_on_tcp(const std::string& name, drivers::ByteDevice& device);

  /// Starts the serving thread.
  void run();
  /// Pulls a line's cable: a pseudo-terminal is closed for good; a TCP
  /// connection is closed (the listener stays, so a host may connect again
  /// unless refuse_connections() says otherwise).
  void pull(const std::string& name);
  /// The same without waiting, safe from the serving thread itself (a
  /// device's disconnect fault pulls its own cable while answering).
  void pull_soon(const std::string& name);
  /// A TCP line closes every new connection at once while `refuse` is true
  /// (a converter whose serial side is dead).
  void refuse_connections(const std::string& name, bool refuse);
  /// Runs `inspect` on the serving thread between device calls and waits:
  /// the only safe way to touch served devices while hosts talk to them.
  void with_devices(const std::function<void()>& inspect);
  /// Stops serving and joins the thread; idempotent.
  void stop();
  /// Problems met while serving (a failed read, an exception from a device).
  std::vector<std::string> problems() const;

  class Impl;

 private:
  drivers::ScaledClock clock_;
  std::unique_ptr<Impl> impl_;
};

}  // namespace veq::simulator
