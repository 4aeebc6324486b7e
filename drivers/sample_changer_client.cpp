#include "drivers/sample_changer_client.hpp"

#include <algorithm>
#include <cmath>

#include "drivers/reply_fields.hpp"

namespace veq::drivers {

namespace rf = reply_fields;

const char* changer_state_name(ChangerState state) {
  switch (state) {
    case ChangerState::idle:
      return "idle";
    case ChangerState::moving:
      return "moving";
    case ChangerState::rinsing:
      return "rinsing";
    case ChangerState::fault:
      return "fault";
  }
  return "unknown";
}

const char* head_position_name(HeadPosition head) {
  switch (head) {
    case HeadPosition::up:
      return "up";
    case HeadPosition::down:
      return "down";
    case HeadPosition::between:
      return "between";
  }
  return "unknown";
}

namespace changer_messages {

protocol::Message identify() {
  return rf::request("identify");
}
protocol::Message move(int position) {
  auto m = rf::request("move");
  m.add("position", std::to_string(position));
  return m;
}
protocol::Message lower() {
  return rf::request("lower");
}
protocol::Message raise() {
  return rf::request("raise");
}
protocol::Message rinse(double seconds) {
  auto m = rf::request("rinse");
  m.add("seconds", seconds, 1);
  return m;
}
protocol::Message status() {
  return rf::request("status");
}
protocol::Message stop() {
  return rf::request("stop");
}

Result<ChangerInfo> parse_identity(const protocol::Message& reply, const std::string& device) {
  if (auto ok = rf::expect_role(reply, "sample_changer", device, "a sample changer"); !ok)
    return ok.error();
  ChangerInfo info;
  info.model = rf::text_or(reply, "model", "unknown");
  info.serial_number = rf::text_or(reply, "serial_number", "");
  auto positions = rf::whole(reply, "positions", 1, 1000, device);
  if (!positions)
    return positions.error();
  info.positions = *positions;
  const std::string rinse = rf::text_or(reply, "rinse", "no");
  if (rinse != "yes" && rinse != "no") {
    return make_error(ErrorKind::garbled,
                      device + ": field 'rinse' is '" + rinse + "', not 'yes' or 'no'");
  }
  info.has_rinse = rinse == "yes";
  info.features = parse_features(reply, info.has_rinse ? std::vector<std::string>{"rinse", "ping"}
                                                       : std::vector<std::string>{"ping"});
  return info;
}

Result<ChangerStatus> parse_status(const protocol::Message& reply, const std::string& device) {
  ChangerStatus s;
  auto state = rf::text(reply, "state", device);
  if (!state)
    return state.error();
  bool known = false;
  for (ChangerState c :
       {ChangerState::idle, ChangerState::moving, ChangerState::rinsing, ChangerState::fault}) {
    if (*state == changer_state_name(c)) {
      s.state = c;
      known = true;
    }
  }
  if (!known)
    return make_error(ErrorKind::garbled, device + ": unknown changer state '" + *state + "'");
  auto position = rf::whole(reply, "position", 0, 1000, device);
  if (!position)
    return position.error();
  s.position = *position;
  auto head = rf::text(reply, "head", device);
  if (!head)
    return head.error();
  known = false;
  for (HeadPosition h : {HeadPosition::up, HeadPosition::down, HeadPosition::between}) {
    if (*head == head_position_name(h)) {
      s.head = h;
      known = true;
    }
  }
  if (!known)
    return make_error(ErrorKind::garbled, device + ": unknown head position '" + *head + "'");
  s.fault = rf::text_or(reply, "fault", "none");
  return s;
}

}  // namespace changer_messages

SampleChangerClient::SampleChangerClient(DeviceChannel& link, ChangerClientOptions options)
    : link_(link), options_(options) {}

Result<ChangerInfo> SampleChangerClient::identify() {
  auto reply = link_.call(changer_messages::identify());
  if (!reply)
    return reply.error();
  auto info = changer_messages::parse_identity(*reply, describe());
  if (!info)
    return info.error();
  info_ = *info;
  identified_ = true;
  return info;
}

Result<ChangerStatus> SampleChangerClient::wait_until_idle(const std::string& what) {
  Clock& clock = link_.clock();
  const Duration give_up = clock.now() + from_seconds(options_.motion_timeout_s);
  const Duration poll = from_seconds(options_.poll_interval_s);
  while (true) {
    auto s = status();
    if (!s)
      return s.error();
    if (s->state == ChangerState::fault) {
      return make_error(ErrorKind::device_fault,
                        describe() + " reports fault '" + s->fault + "' during " + what);
    }
    if (s->state == ChangerState::idle)
      return s;
    if (clock.now() >= give_up) {
      auto stopped = stop();
      return make_error(ErrorKind::device_fault,
                        describe() + ": " + what + " not finished after " +
                            protocol::format_number(options_.motion_timeout_s, 0) + " s" +
                            (stopped ? "; stopped" : "; stop failed: " + stopped.error().message));
    }
    clock.sleep_for(std::min(poll, give_up - clock.now() + Duration(1)));
  }
}

Result<ChangerStatus> SampleChangerClient::move_to(int position) {
  if (position < 1 || (identified_ && position > info_.positions)) {
    return make_error(
        ErrorKind::invalid_input,
        describe() + ": position " + std::to_string(position) + " does not exist" +
            (identified_ ? " (the rack has 1 to " + std::to_string(info_.positions) + ")"
                         : std::string()));
  }
  auto reply = link_.call(changer_messages::move(position));
  if (!reply)
    return reply.error();
  auto done = wait_until_idle("the move to position " + std::to_string(position));
  if (!done)
    return done;
  if (done->position != position) {
    return make_error(ErrorKind::device_fault, describe() + " stopped at position " +
                                                   std::to_string(done->position) + ", not " +
                                                   std::to_string(position));
  }
  return done;
}

Result<ChangerStatus> SampleChangerClient::lower() {
  auto reply = link_.call(changer_messages::lower());
  if (!reply)
    return reply.error();
  return wait_until_idle("lowering the head");
}

Result<ChangerStatus> SampleChangerClient::raise() {
  auto reply = link_.call(changer_messages::raise());
  if (!reply)
    return reply.error();
  return wait_until_idle("raising the head");
}

Result<ChangerStatus> SampleChangerClient::rinse(double seconds) {
  if (!std::isfinite(seconds) || seconds <= 0.0 || seconds > 600.0) {
    return make_error(ErrorKind::invalid_input,
                      describe() + ": a rinse lasts more than 0 and at most 600 s");
  }
  auto reply = link_.call(changer_messages::rinse(seconds));
  if (!reply)
    return reply.error();
  return wait_until_idle("the rinse");
}

Result<ChangerStatus> SampleChangerClient::status() {
  auto reply = link_.call(changer_messages::status());
  if (!reply)
    return reply.error();
  return changer_messages::parse_status(*reply, describe());
}

Result<ChangerStatus> SampleChangerClient::stop() {
  auto reply = link_.call(changer_messages::stop());
  if (!reply)
    return reply.error();
  return changer_messages::parse_status(*reply, describe());
}

}  // namespace veq::drivers
