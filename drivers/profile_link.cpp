#include "drivers/profile_link.hpp"

#include <utility>

#include "drivers/features.hpp"
#include "drivers/line_framing.hpp"

namespace veq::drivers {

Result<std::unique_ptr<ProfileLink>> ProfileLink::open(Transport& transport, Clock& clock,
                                                       std::string device_name,
                                                       profile::Profile profile,
                                                       LinkOptions options) {
  if (auto set = transport.set_line_end(profile.reply_end); !set) {
    return make_error(set.error().kind, "profile '" + profile.model + "': " + set.error().message);
  }
  return std::unique_ptr<ProfileLink>(
      new ProfileLink(transport, clock, std::move(device_name), std::move(profile), options));
}

ProfileLink::ProfileLink(Transport& transport, Clock& clock, std::string device_name,
                         profile::Profile profile, LinkOptions options)
    : DeviceChannel(transport, clock, std::move(device_name), options),
      profile_(std::move(profile)),
      reply_timeout_(profile_.reply_timeout.value_or(options.reply_timeout)) {}

Result<protocol::Message> ProfileLink::run(const profile::Operation& op,
                                           const protocol::Message& request,
                                           const std::string& where) {
  auto bytes = profile::encode_command(profile_, request);
  if (!bytes)
    return make_error(bytes.error().kind, where + ": " + bytes.error().message);
  if (auto sent = transport_.write_all(*bytes, reply_timeout_); !sent)
    return make_error(sent.error().kind, where + ": " + sent.error().message);
  const std::string command = bytes->substr(0, bytes->size() - profile_.command_end.size());
  bool echo_seen = !profile_.echo;
  // On the line's time base (see DeviceLink::exchange).
  const auto deadline = transport_.deadline_now() + reply_timeout_;
  while (true) {
    const auto left = transport_.time_left(deadline);
    if (left.count() <= 0) {
      return make_error(ErrorKind::timeout, where + ": no reply within " +
                                                std::to_string(reply_timeout_.count()) + " ms");
    }
    auto line = transport_.read_line(left);
    if (!line) {
      transport_.discard_input();
      return make_error(line.error().kind, where + ": " + line.error().message);
    }
    if (!echo_seen && *line == command) {
      echo_seen = true;
      continue;
    }
    auto reply = profile::read_reply(profile_, op, *line);
    if (!reply) {
      transport_.discard_input();
      return make_error(ErrorKind::garbled, where + ": " + reply.error().message);
    }
    if (reply->word == "reading") {
      keep_unsolicited(std::move(reply).value());
      continue;
    }
    if (reply->word == "error") {
      auto reason = reply->find("reason");
      auto text = reply->find("message");
      return make_error(ErrorKind::device_refused,
                        where + ": " + std::string(reason ? *reason : "refused") +
                            (text ? " (" + std::string(*text) + ")" : std::string()));
    }
    return std::move(reply).value();
  }
}

Result<protocol::Message> ProfileLink::exchange(protocol::Message request) {
  const std::string where = describe() + " ('" + request.word + "')";
  const profile::Operation* op = profile_.find(request.word);
  if (!op) {
    return make_error(ErrorKind::device_refused, where + ": unknown_command (the profile of " +
                                                     profile_.model + " maps no '" + request.word +
                                                     "')");
  }
  auto reply = run(*op, request, where);
  if (!reply)
    return reply;
  if (!op->then.empty()) {
    const profile::Operation* next = profile_.find(op->then);
    protocol::Message follow;
    follow.word = op->then;
    auto more =
        run(*next, follow, describe() + " ('" + request.word + "' then '" + op->then + "')");
    if (!more)
      return more;
    for (auto& f : more->fields) {
      if (!reply->find(f.name))
        reply->fields.push_back(std::move(f));
    }
  }
  if (request.word == "identify") {
    protocol::Message m;
    m.word = "ok";
    m.add("role", std::string(role_name(profile_.role)));
    m.add("model", std::string(reply->find("model").value_or(profile_.model)));
    m.add("protocol", "profile");
    for (const auto& f : profile_.facts) {
      if (!m.find(f.name))
        m.fields.push_back(f);
    }
    for (const auto& f : reply->fields) {
      if (!m.find(f.name))
        m.fields.push_back(f);
    }
    if (!m.find("features"))
      m.add("features", join_features(profile_.features()));
    return m;
  }
  return reply;
}

Result<std::optional<protocol::Message>> ProfileLink::read_unsolicited(
    std::chrono::milliseconds timeout) {
  auto line = transport_.read_line(timeout);
  if (!line) {
    if (line.error().kind != ErrorKind::timeout)
      transport_.discard_input();
    return line.error();
  }
  auto reading = profile::read_unsolicited(profile_, *line);
  if (!reading) {
    transport_.discard_input();
    return reading.error();
  }
  return std::optional<protocol::Message>(std::move(reading).value());
}

}  // namespace veq::drivers
