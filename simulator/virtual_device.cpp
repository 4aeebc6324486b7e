#include "simulator/virtual_device.hpp"

namespace veq::simulator {

namespace protocol = drivers::protocol;

VirtualDevice::VirtualDevice(drivers::Clock& clock, std::uint64_t seed)
    : clock_(clock), random_(seed) {}

bool VirtualDevice::fault_active() const {
  return fault_.kind != FaultKind::none && clock_.now_s() >= fault_.after_s;
}

std::string VirtualDevice::receive(std::string_view bytes) {
  std::unique_lock<std::mutex> lock;
  if (bench_lock_)
    lock = std::unique_lock<std::mutex>(*bench_lock_);
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

std::string VirtualDevice::answer(std::string_view line) {
  auto request = protocol::parse(line);
  protocol::Message reply;
  if (!request) {
    reply = protocol::error_reply(0, "unreadable_request", request.error().message);
  } else {
    reply = handle(*request);
    reply.sequence = request->sequence;
  }
  std::string bytes = protocol::encode(reply);
  if (!fault_active())
    return bytes;
  switch (fault_.kind) {
    case FaultKind::silence:
      return {};
    case FaultKind::garbage: {
      // Line noise: printable and unprintable bytes, then a line end.
      std::string noise;
      std::uniform_int_distribution<int> byte(1, 255);
      for (std::size_t i = 0; i < bytes.size(); ++i) {
        char c = static_cast<char>(byte(random_));
        if (c == '\n')
          c = '#';
        noise += c;
      }
      return noise + "\n";
    }
    case FaultKind::partial_line:
      return bytes.substr(0, bytes.size() / 2);
    case FaultKind::none:
      break;
  }
  return bytes;
}

}  // namespace veq::simulator
