#include "simulator/profile_device.hpp"

#include <utility>

#include "drivers/line_framing.hpp"

namespace veq::simulator {

namespace protocol = drivers::protocol;
namespace profile = drivers::profile;

ProfileSpeakingDevice::ProfileSpeakingDevice(profile::Profile p, VirtualDevice& device)
    : profile_(std::move(p)), device_(device) {}

std::string ProfileSpeakingDevice::receive(std::string_view bytes) {
  pending_.append(bytes);
  std::string out;
  while (auto line = drivers::take_line(pending_, profile_.command_end))
    out += answer(*line);
  if (pending_.size() > drivers::kMaxLineBytes)
    pending_.clear();
  return out;
}

std::string ProfileSpeakingDevice::answer(const std::string& line) {
  if (device_.cable_pulled())
    return {};
  std::string bytes;
  if (profile_.echo)
    bytes = line + profile_.reply_end;
  auto request = profile::parse_command(profile_, line);
  protocol::Message reply;
  std::string word;
  if (!request) {
    problems_.push_back(drivers::escape_bytes(line) + ": " + request.error().message);
    reply = protocol::error_reply(0, "unknown_command", request.error().message);
  } else {
    word = request->word;
    reply = device_.respond(*request);
  }
  auto text = profile::encode_reply(profile_, word, reply);
  if (!text) {
    // The profile cannot say this (an unmapped reason, say): the instrument
    // answers nothing, and the host times out as it would on real hardware.
    problems_.push_back(drivers::escape_bytes(line) + ": " + text.error().message);
    return device_.through_line(std::move(bytes));
  }
  return device_.through_line(bytes + *text);
}

std::optional<drivers::Duration> ProfileSpeakingDevice::next_unsolicited_at() const {
  return device_.next_unsolicited_at();
}

std::string ProfileSpeakingDevice::unsolicited() {
  if (device_.cable_pulled())
    return {};
  std::string out = device_.release_delayed();
  auto reading = device_.take_streamed();
  if (!reading)
    return out;
  auto text = profile::encode_unsolicited(profile_, *reading);
  if (!text) {
    problems_.push_back("streamed reading: " + text.error().message);
    return out;
  }
  return out + device_.through_line(*text) + device_.release_delayed();
}

}  // namespace veq::simulator
