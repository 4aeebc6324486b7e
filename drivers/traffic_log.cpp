#include "drivers/traffic_log.hpp"

#include <cstdio>
#include <ctime>
#include <fstream>
#include <map>
#include <ostream>

namespace veq::drivers {

TrafficLog::TrafficLog(std::ostream& out) : out_(&out), start_(std::chrono::steady_clock::now()) {}

TrafficLog::~TrafficLog() {
  std::lock_guard lock(mutex_);
  out_->flush();
}

Result<std::shared_ptr<TrafficLog>> TrafficLog::open_file(const std::string& path) {
  // Lines naming the same file share one log, so that their entries never
  // tear each other apart. Logs live as long as some line uses them.
  static std::mutex registry_mutex;
  static std::map<std::string, std::weak_ptr<TrafficLog>> registry;
  std::lock_guard lock(registry_mutex);
  if (auto existing = registry[path].lock())
    return existing;
  auto file = std::make_unique<std::ofstream>(path, std::ios::app | std::ios::binary);
  if (!*file) {
    return make_error(ErrorKind::io, "traffic log '" + path +
                                         "' cannot be opened for writing; check the folder "
                                         "exists and is writable");
  }
  auto log = std::make_shared<TrafficLog>(*file);
  log->owned_ = std::move(file);
  registry[path] = log;
  return log;
}

void TrafficLog::record(std::string_view line, Direction direction, std::string_view bytes) {
  const auto wall = std::chrono::system_clock::now();
  const auto since = std::chrono::steady_clock::now() - start_;
  const auto wall_us =
      std::chrono::duration_cast<std::chrono::microseconds>(wall.time_since_epoch()).count();
  const std::time_t seconds = static_cast<std::time_t>(wall_us / 1000000);
  std::tm utc{};
  gmtime_r(&seconds, &utc);
  char stamp[80];
  std::snprintf(stamp, sizeof stamp, "%04d-%02d-%02dT%02d:%02d:%02d.%06ldZ +%.6f",
                utc.tm_year + 1900, utc.tm_mon + 1, utc.tm_mday, utc.tm_hour, utc.tm_min,
                utc.tm_sec, static_cast<long>(wall_us % 1000000),
                std::chrono::duration<double>(since).count());
  const char* arrow = direction == Direction::sent       ? " > "
                      : direction == Direction::received ? " < "
                                                         : " ! ";
  std::string entry = stamp;
  entry += ' ';
  entry += line;
  entry += arrow;
  entry += direction == Direction::event ? std::string(bytes) : escape_bytes(bytes);
  entry += '\n';
  std::lock_guard lock(mutex_);
  *out_ << entry;
  // Flushed at once: the log matters most when the program is about to die.
  out_->flush();
  ++entries_;
}

std::uint64_t TrafficLog::entries() const {
  std::lock_guard lock(mutex_);
  return entries_;
}

LoggingTransport::LoggingTransport(std::unique_ptr<Transport> inner,
                                   std::shared_ptr<TrafficLog> log)
    : owned_(std::move(inner)), inner_(owned_.get()), log_(std::move(log)) {}

LoggingTransport::LoggingTransport(Transport& inner, std::shared_ptr<TrafficLog> log)
    : inner_(&inner), log_(std::move(log)) {}

Result<void> LoggingTransport::write_all(std::string_view bytes,
                                         std::chrono::milliseconds timeout) {
  const std::string line = inner_->describe();
  log_->record(line, TrafficLog::Direction::sent, bytes);
  auto sent = inner_->write_all(bytes, timeout);
  if (!sent)
    log_->note(line, sent.error().describe());
  return sent;
}

Result<std::string> LoggingTransport::read_line(std::chrono::milliseconds timeout) {
  auto received = inner_->read_line(timeout);
  if (received) {
    log_->record(inner_->describe(), TrafficLog::Direction::received,
                 *received + inner_->line_end());
  } else {
    log_->note(inner_->describe(), received.error().describe());
  }
  return received;
}

void LoggingTransport::discard_input() {
  log_->note(inner_->describe(), "input discarded");
  inner_->discard_input();
}

Result<void> LoggingTransport::set_line_end(std::string_view terminator) {
  auto set = inner_->set_line_end(terminator);
  if (set)
    log_->note(inner_->describe(), "line end set to " + line_end_name(terminator));
  return set;
}

Result<void> LoggingTransport::reopen() {
  auto reopened = inner_->reopen();
  log_->note(inner_->describe(), reopened ? std::string("line reopened")
                                          : "reopen failed: " + reopened.error().describe());
  return reopened;
}

}  // namespace veq::drivers
