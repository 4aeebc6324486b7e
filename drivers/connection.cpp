#include "drivers/connection.hpp"

#include "drivers/reopening_transport.hpp"
#include "drivers/traffic_log.hpp"

#include <charconv>
#include <set>
#include <utility>

namespace veq::drivers {

namespace {

struct Parser {
  std::string_view text;

  Error fail(const std::string& what) const {
    return make_error(ErrorKind::invalid_input,
                      "connection string '" + std::string(text) + "': " + what);
  }

  /// A whole decimal number in [low, high], or an error naming the setting.
  Result<unsigned long> whole(std::string_view name, std::string_view value, unsigned long low,
                              unsigned long high) const {
    unsigned long number = 0;
    const auto* end = value.data() + value.size();
    const auto [ptr, ec] = std::from_chars(value.data(), end, number);
    if (value.empty() || ec != std::errc() || ptr != end || number < low || number > high) {
      return fail(std::string(name) + " '" + std::string(value) + "' is not a whole number from " +
                  std::to_string(low) + " to " + std::to_string(high));
    }
    return number;
  }

  /// Splits "a=1&b=2" into calls of set(name, value); rejects repeats and
  /// empty pairs (a stray '&' or a '?' with nothing after it).
  template <typename Set>
  Result<void> each_setting(std::string_view query, Set set) const {
    std::set<std::string, std::less<>> seen;
    std::size_t start = 0;
    while (true) {
      const auto amp = query.find('&', start);
      const std::string_view pair = query.substr(start, amp - start);
      const auto eq = pair.find('=');
      if (eq == std::string_view::npos || eq == 0) {
        return fail("setting '" + std::string(pair) + "' is not of the form name=value");
      }
      const std::string_view name = pair.substr(0, eq);
      if (!seen.insert(std::string(name)).second)
        return fail("setting '" + std::string(name) + "' is given twice");
      if (auto r = set(name, pair.substr(eq + 1)); !r)
        return r;
      if (amp == std::string_view::npos)
        break;
      start = amp + 1;
    }
    return {};
  }

  Result<ConnectionSettings> serial(std::string_view rest) const {
    SerialSettings s;
    const auto question = rest.find('?');
    s.device = std::string(rest.substr(0, question));
    if (s.device.empty())
      return fail("no device path after 'serial:' (e.g. serial:/dev/ttyUSB0)");
    if (question == std::string_view::npos)
      return ConnectionSettings(std::move(s));
    auto set = [&](std::string_view name, std::string_view value) -> Result<void> {
      if (name == "baud") {
        // 4 Mbit/s is the fastest rate Linux serial drivers name (B4000000).
        auto n = whole(name, value, 1, 4000000);
        if (!n)
          return n.error();
        s.baud_rate = static_cast<unsigned>(*n);
      } else if (name == "data_bits") {
        auto n = whole(name, value, 5, 8);
        if (!n)
          return n.error();
        s.data_bits = static_cast<unsigned>(*n);
      } else if (name == "parity") {
        if (value == "none")
          s.parity = Parity::none;
        else if (value == "odd")
          s.parity = Parity::odd;
        else if (value == "even")
          s.parity = Parity::even;
        else
          return fail("parity '" + std::string(value) + "' is not one of none, odd, even");
      } else if (name == "stop_bits") {
        if (value == "1")
          s.stop_bits = StopBits::one;
        else if (value == "1.5")
          s.stop_bits = StopBits::one_and_half;
        else if (value == "2")
          s.stop_bits = StopBits::two;
        else
          return fail("stop_bits '" + std::string(value) + "' is not one of 1, 1.5, 2");
      } else if (name == "flow") {
        if (value == "none")
          s.flow = FlowControl::none;
        else if (value == "software")
          s.flow = FlowControl::software;
        else if (value == "hardware")
          s.flow = FlowControl::hardware;
        else
          return fail("flow '" + std::string(value) + "' is not one of none, software, hardware");
      } else if (name == "traffic_log") {
        if (value.empty())
          return fail("traffic_log needs a file path");
        s.traffic_log = std::string(value);
      } else {
        return fail("unknown serial setting '" + std::string(name) +
                    "' (known: baud, data_bits, parity, stop_bits, flow, traffic_log)");
      }
      return {};
    };
    if (auto r = each_setting(rest.substr(question + 1), set); !r)
      return r.error();
    return ConnectionSettings(std::move(s));
  }

  Result<ConnectionSettings> tcp(std::string_view rest) const {
    TcpSettings s;
    const auto question = rest.find('?');
    const std::string_view address = rest.substr(0, question);
    const auto colon = address.rfind(':');
    if (colon == std::string_view::npos || colon == 0) {
      return fail("expected tcp:<host>:<port>, e.g. tcp:192.0.2.10:4001");
    }
    s.host = std::string(address.substr(0, colon));
    // An IPv6 address is written in brackets so that its colons stay apart
    // from the port's: tcp:[2001:db8::10]:4001.
    if (s.host.size() >= 2 && s.host.front() == '[' && s.host.back() == ']')
      s.host = s.host.substr(1, s.host.size() - 2);
    auto port = whole("port", address.substr(colon + 1), 1, 65535);
    if (!port)
      return port.error();
    s.port = static_cast<std::uint16_t>(*port);
    if (question == std::string_view::npos)
      return ConnectionSettings(std::move(s));
    auto set = [&](std::string_view name, std::string_view value) -> Result<void> {
      if (name == "connect_timeout_ms") {
        auto n = whole(name, value, 1, 600000);
        if (!n)
          return n.error();
        s.connect_timeout = std::chrono::milliseconds(*n);
        return {};
      }
      if (name == "traffic_log") {
        if (value.empty())
          return fail("traffic_log needs a file path");
        s.traffic_log = std::string(value);
        return {};
      }
      return fail("unknown tcp setting '" + std::string(name) +
                  "' (known: connect_timeout_ms, traffic_log)");
    };
    if (auto r = each_setting(rest.substr(question + 1), set); !r)
      return r.error();
    return ConnectionSettings(std::move(s));
  }
};

}  // namespace

Result<ConnectionSettings> parse_connection_string(std::string_view text) {
  const Parser parser{text};
  const auto colon = text.find(':');
  if (colon == std::string_view::npos) {
    return parser.fail(
        "no kind of connection before ':'; expected serial:<device path> or "
        "tcp:<host>:<port>");
  }
  const std::string_view kind = text.substr(0, colon);
  if (kind == "serial")
    return parser.serial(text.substr(colon + 1));
  if (kind == "tcp")
    return parser.tcp(text.substr(colon + 1));
  return parser.fail("unknown kind of connection '" + std::string(kind) + "' (known: serial, tcp)");
}

std::string to_connection_string(const ConnectionSettings& settings) {
  return std::visit([](const auto& s) { return to_connection_string(s); }, settings);
}

Result<std::unique_ptr<Transport>> open_transport(const ConnectionSettings& settings) {
  ReopeningTransport::Opener opener = [settings]() -> Result<std::unique_ptr<Transport>> {
    if (const auto* serial = std::get_if<SerialSettings>(&settings))
      return open_serial_transport(*serial);
    return open_tcp_transport(std::get<TcpSettings>(settings));
  };
  const std::string& log_path =
      std::visit([](const auto& s) -> const std::string& { return s.traffic_log; }, settings);
  std::shared_ptr<TrafficLog> log;
  if (!log_path.empty()) {
    auto opened = TrafficLog::open_file(log_path);
    if (!opened)
      return opened.error();
    log = std::move(opened).value();
  }
  auto first = opener();
  if (!first) {
    if (log)
      log->note(to_connection_string(settings), "cannot open: " + first.error().describe());
    return first.error();
  }
  std::unique_ptr<Transport> line =
      std::make_unique<ReopeningTransport>(std::move(first).value(), std::move(opener));
  if (log) {
    log->note(line->describe(), "line opened");
    line = std::make_unique<LoggingTransport>(std::move(line), std::move(log));
  }
  return line;
}

Result<std::unique_ptr<Transport>> open_transport(std::string_view connection_string) {
  auto settings = parse_connection_string(connection_string);
  if (!settings)
    return settings.error();
  return open_transport(*settings);
}

}  // namespace veq::drivers
