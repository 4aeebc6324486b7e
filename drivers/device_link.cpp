#include "drivers/device_link.hpp"

#include <utility>

namespace veq::drivers {

namespace {
/// A message the device sent on its own rather than in answer.
bool is_unsolicited(const protocol::Message& m) {
  return m.sequence == 0 && m.word != "ok" && m.word != "error";
}
}  // namespace

DeviceLink::DeviceLink(Transport& transport, Clock& clock, std::string device_name,
                       LinkOptions options)
    : DeviceChannel(transport, clock, std::move(device_name), options) {}

Result<protocol::Message> DeviceLink::exchange(protocol::Message request) {
  request.sequence = next_sequence_;
  next_sequence_ = next_sequence_ >= 65535 ? 1 : next_sequence_ + 1;
  const std::string command = request.word;
  auto where = [&] { return describe() + " ('" + command + "')"; };

  if (auto sent = transport_.write_all(protocol::encode(request), options_.reply_timeout); !sent) {
    return make_error(sent.error().kind, where() + ": " + sent.error().message);
  }
  // On the line's time base, as the transport counts `left`: the run's clock
  // may be scaled (a 50x demo), the line and the host's scheduler are not.
  const auto deadline = transport_.deadline_now() + options_.reply_timeout;
  while (true) {
    const auto left = transport_.time_left(deadline);
    if (left.count() <= 0) {
      return make_error(
          ErrorKind::timeout,
          where() + ": no reply within " + std::to_string(options_.reply_timeout.count()) + " ms");
    }
    auto line = transport_.read_line(left);
    if (!line) {
      transport_.discard_input();
      return make_error(line.error().kind, where() + ": " + line.error().message);
    }
    auto reply = protocol::parse(*line);
    if (!reply) {
      transport_.discard_input();
      return make_error(ErrorKind::garbled, where() + ": " + reply.error().message);
    }
    if (is_unsolicited(*reply)) {
      keep_unsolicited(std::move(reply).value());
      continue;
    }
    if (reply->sequence != request.sequence)
      continue;  // a late answer to an earlier request
    if (reply->word == "error") {
      auto reason = reply->find("reason");
      auto text = reply->find("message");
      return make_error(ErrorKind::device_refused,
                        where() + ": " + std::string(reason ? *reason : "unknown") +
                            (text ? " (" + std::string(*text) + ")" : std::string()));
    }
    if (reply->word != "ok") {
      return make_error(ErrorKind::garbled,
                        where() + ": reply word '" + reply->word + "' is neither 'ok' nor 'error'");
    }
    return std::move(reply).value();
  }
}

Result<std::optional<protocol::Message>> DeviceLink::read_unsolicited(
    std::chrono::milliseconds timeout) {
  auto line = transport_.read_line(timeout);
  if (!line) {
    if (line.error().kind != ErrorKind::timeout)
      transport_.discard_input();
    return line.error();
  }
  auto message = protocol::parse(*line);
  if (!message) {
    transport_.discard_input();
    return message.error();
  }
  if (is_unsolicited(*message))
    return std::optional<protocol::Message>(std::move(message).value());
  return std::optional<protocol::Message>();
}

}  // namespace veq::drivers
