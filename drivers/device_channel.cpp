#include "drivers/device_channel.hpp"

#include <algorithm>
#include <cmath>
#include <utility>

#include "drivers/roles.hpp"

namespace veq::drivers {

DeviceChannel::DeviceChannel(Transport& transport, Clock& clock, std::string device_name,
                             LinkOptions options)
    : transport_(transport), clock_(clock), name_(std::move(device_name)), options_(options) {}

bool DeviceChannel::dose_may_be_in_flight() const {
  std::lock_guard lock(exchange_);
  return dose_in_flight_;
}

int DeviceChannel::reconnections() const {
  std::lock_guard lock(exchange_);
  return reconnections_;
}

std::size_t DeviceChannel::dropped_unsolicited() const {
  std::lock_guard lock(exchange_);
  return dropped_;
}

void DeviceChannel::keep_unsolicited(protocol::Message message) {
  if (options_.unsolicited_capacity == 0) {
    ++dropped_;
    return;
  }
  while (unsolicited_.size() >= options_.unsolicited_capacity) {
    unsolicited_.pop_front();
    ++dropped_;
  }
  unsolicited_.push_back(std::move(message));
}

void DeviceChannel::track_motion(const protocol::Message& request, const protocol::Message& reply) {
  if (request.word == "stop") {
    dose_in_flight_ = false;
  } else if (request.word == "status") {
    const auto state = reply.find("state");
    if (state && *state == "idle")
      dose_in_flight_ = false;
  }
}

Result<int> DeviceChannel::reopen_line() {
  const ReconnectPolicy& p = options_.reconnect;
  auto delay = p.first_delay;
  std::string last;
  for (int attempt = 1; attempt <= p.max_attempts; ++attempt) {
    clock_.sleep_for(delay);
    auto reopened = transport_.reopen();
    if (reopened) {
      ++reconnections_;
      return attempt;
    }
    last = reopened.error().message;
    const double next = static_cast<double>(delay.count()) * std::max(1.0, p.backoff_factor);
    delay =
        std::min(p.max_delay, std::chrono::milliseconds(static_cast<long long>(std::ceil(next))));
  }
  return make_error(ErrorKind::disconnected, std::to_string(p.max_attempts) + " attempt" +
                                                 (p.max_attempts == 1 ? "" : "s") +
                                                 " to reopen the line failed (last: " + last + ")");
}

Result<protocol::Message> DeviceChannel::call(protocol::Message request) {
  std::lock_guard lock(exchange_);
  const std::string word = request.word;
  if (starts_dosing(word))
    dose_in_flight_ = true;
  auto reply = exchange(request);
  if (!reply && reply.error().kind == ErrorKind::disconnected &&
      options_.reconnect.max_attempts > 0) {
    const Error lost = reply.error();
    auto reopened = reopen_line();
    if (!reopened)
      return make_error(ErrorKind::disconnected, lost.message + "; " + reopened.error().message);
    const std::string back =
        "the line was lost and reopened (attempt " + std::to_string(*reopened) + ")";
    if (dose_in_flight_ && word != "stop") {
      // Whatever the request was, the device may be dosing without anyone
      // watching it: stop it before anything else, and tell the caller.
      protocol::Message stop;
      stop.word = "stop";
      auto stopped = exchange(stop);
      if (stopped)
        dose_in_flight_ = false;
      return make_error(ErrorKind::disconnected,
                        lost.message + "; " + back +
                            " and 'stop' was sent first because a dose may have been in flight (" +
                            (stopped ? std::string("stop confirmed")
                                     : "stop not confirmed: " + stopped.error().message) +
                            "); '" + word + "' was not repeated");
    }
    reply = exchange(request);
    if (!reply) {
      return make_error(reply.error().kind, reply.error().message + " (after " + back + ")");
    }
  }
  if (reply)
    track_motion(request, *reply);
  return reply;
}

Result<protocol::Message> DeviceChannel::next_unsolicited(std::chrono::milliseconds timeout) {
  std::lock_guard lock(exchange_);
  if (!unsolicited_.empty()) {
    protocol::Message m = std::move(unsolicited_.front());
    unsolicited_.pop_front();
    return m;
  }
  // On the line's time base (see DeviceLink::exchange).
  const auto deadline = transport_.deadline_now() + timeout;
  while (true) {
    const auto left = transport_.time_left(deadline);
    if (left.count() <= 0) {
      return make_error(ErrorKind::timeout, describe() + " (streamed reading): nothing within " +
                                                std::to_string(timeout.count()) + " ms");
    }
    auto message = read_unsolicited(left);
    if (!message) {
      return make_error(message.error().kind,
                        describe() + " (streamed reading): " + message.error().message);
    }
    if (*message)
      return std::move(**message);
  }
}

}  // namespace veq::drivers
