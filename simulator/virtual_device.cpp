#include "simulator/virtual_device.hpp"

namespace veq::simulator {

namespace protocol = drivers::protocol;

VirtualDevice::VirtualDevice(drivers::Clock& clock, std::uint64_t seed)
    : clock_(clock), random_(seed) {}

bool VirtualDevice::fault_active() const {
  return fault_.kind != FaultKind::none && clock_.now_s() >= fault_.after_s;
}

std::unique_lock<std::mutex> VirtualDevice::lock_bench() {
  if (bench_lock_)
    return std::unique_lock<std::mutex>(*bench_lock_);
  return {};
}

std::string VirtualDevice::receive(std::string_view bytes) {
  pending_.append(bytes);
  std::string out;
  std::size_t end;
  while ((end = pending_.find('\n')) != std::string::npos) {
    const std::string line = pending_.substr(0, end);
    pending_.erase(0, end + 1);
    out += answer(line);
  }
  if (pending_.size() > drivers::kMaxLineBytes)
    pending_.clear();
  return out;
}

protocol::Message VirtualDevice::respond(const protocol::Message& request) {
  auto lock = lock_bench();
  protocol::Message reply = handle(request);
  reply.sequence = request.sequence;
  return reply;
}

std::string VirtualDevice::answer(std::string_view line) {
  auto request = protocol::parse(line);
  protocol::Message reply;
  if (!request) {
    reply = protocol::error_reply(0, "unreadable_request", request.error().message);
  } else {
    reply = respond(*request);
  }
  return through_line(protocol::encode(reply));
}

void VirtualDevice::stream_every(drivers::Duration interval) {
  stream_interval_ = interval > drivers::Duration::zero() ? interval : drivers::Duration::zero();
  next_stream_ = clock_.now() + stream_interval_;
}

std::optional<drivers::Duration> VirtualDevice::next_unsolicited_at() const {
  if (!streaming())
    return std::nullopt;
  return next_stream_;
}

std::optional<protocol::Message> VirtualDevice::take_streamed() {
  auto lock = lock_bench();
  if (!streaming() || clock_.now() < next_stream_)
    return std::nullopt;
  const auto now = clock_.now();
  while (next_stream_ <= now)
    next_stream_ += stream_interval_;
  protocol::Message m = reading();
  m.word = "reading";
  m.sequence = 0;
  return m;
}

std::string VirtualDevice::unsolicited() {
  auto m = take_streamed();
  if (!m)
    return {};
  return through_line(protocol::encode(*m));
}

std::string VirtualDevice::through_line(std::string bytes) {
  if (bytes.empty() || !fault_active())
    return bytes;
  switch (fault_.kind) {
    case FaultKind::silence:
      return {};
    case FaultKind::garbage: {
      // Line noise: random bytes in place of the message, ending with the
      // line end it would have had (whatever the dialect), so that the noise
      // arrives as one line and is read, and refused, as a reply.
      std::size_t body = bytes.size();
      while (body > 0 && static_cast<unsigned char>(bytes[body - 1]) < 0x20)
        --body;
      const std::string end = bytes.substr(body);
      std::string noise;
      std::uniform_int_distribution<int> byte(1, 255);
      for (std::size_t i = 0; i < body; ++i) {
        char c = static_cast<char>(byte(random_));
        if (c == '\n' || c == '\r' || end.find(c) != std::string::npos)
          c = '#';
        noise += c;
      }
      return noise + end;
    }
    case FaultKind::partial_line:
      return bytes.substr(0, bytes.size() / 2);
    case FaultKind::none:
      break;
  }
  return bytes;
}

}  // namespace veq::simulator
