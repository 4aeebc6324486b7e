#include "simulator/virtual_device.hpp"

namespace veq::simulator {

namespace protocol = drivers::protocol;

VirtualDevice::VirtualDevice(drivers::Clock& clock, std::uint64_t seed)
    : clock_(clock), random_(seed) {}

void VirtualDevice::set_fault(FaultPlan plan) {
  faults_.clear();
  add_fault(plan);
}

void VirtualDevice::add_fault(FaultPlan plan) {
  if (plan.kind != FaultKind::none)
    faults_.push_back(plan);
}

const FaultPlan* VirtualDevice::active_fault(FaultKind kind) const {
  const double now_s = clock_.now_s();
  for (const FaultPlan& f : faults_) {
    if (f.kind == kind && now_s >= f.after_s && now_s < f.until_s)
      return &f;
  }
  return nullptr;
}

bool VirtualDevice::cable_pulled() {
  if (!active_fault(FaultKind::disconnect))
    return false;
  // The cable stays out while the fault lasts: a host that reopens its line
  // loses it again at its next request.
  delayed_.clear();
  pending_.clear();
  if (pull_cable_)
    pull_cable_();
  return true;
}

std::string VirtualDevice::release_delayed() {
  std::string out;
  const auto now = clock_.now();
  while (!delayed_.empty() && delayed_.front().first <= now) {
    out += delayed_.front().second;
    delayed_.pop_front();
  }
  return out;
}

bool VirtualDevice::sensor_faults(double& value, double default_spike) {
  if (active_fault(FaultKind::dead)) {
    // A broken membrane or a dry probe: the meter shows what it last saw.
    if (!dead_value_)
      dead_value_ = value;
    value = *dead_value_;
  } else {
    dead_value_.reset();
  }
  if (const FaultPlan* f = active_fault(FaultKind::spikes)) {
    std::uniform_real_distribution<double> chance(0.0, 1.0);
    if (chance(random_) < f->probability) {
      const double size = f->size > 0.0 ? f->size : default_spike;
      value += chance(random_) < 0.5 ? -size : size;
    }
  }
  return active_fault(FaultKind::out_of_range) == nullptr;
}

std::unique_lock<std::mutex> VirtualDevice::lock_bench() {
  if (bench_lock_)
    return std::unique_lock<std::mutex>(*bench_lock_);
  return {};
}

std::string VirtualDevice::receive(std::string_view bytes) {
  if (cable_pulled())
    return {};
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
  if (before_each_)
    before_each_();
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
  std::optional<drivers::Duration> due;
  if (streaming())
    due = next_stream_;
  if (!delayed_.empty() && (!due || delayed_.front().first < *due))
    due = delayed_.front().first;
  return due;
}

std::optional<protocol::Message> VirtualDevice::take_streamed() {
  auto lock = lock_bench();
  if (!streaming() || clock_.now() < next_stream_)
    return std::nullopt;
  const auto now = clock_.now();
  while (next_stream_ <= now)
    next_stream_ += stream_interval_;
  if (before_each_)
    before_each_();
  protocol::Message m = reading();
  m.word = "reading";
  m.sequence = 0;
  return m;
}

std::string VirtualDevice::unsolicited() {
  if (cable_pulled())
    return {};
  std::string out = release_delayed();
  if (auto m = take_streamed())
    out += through_line(protocol::encode(*m));
  return out + release_delayed();
}

std::string VirtualDevice::through_line(std::string bytes) {
  if (bytes.empty() || faults_.empty())
    return bytes;
  if (active_fault(FaultKind::silence) || active_fault(FaultKind::disconnect))
    return {};
  if (active_fault(FaultKind::garbage)) {
    {
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
      bytes = noise + end;
    }
  } else if (active_fault(FaultKind::partial_line)) {
    bytes = bytes.substr(0, bytes.size() / 2);
  }
  if (const FaultPlan* slow = active_fault(FaultKind::slow_replies)) {
    // The message leaves the device late; later ones queue behind it.
    auto due = clock_.now() + drivers::from_seconds(slow->delay_ms / 1000.0);
    if (!delayed_.empty() && delayed_.back().first > due)
      due = delayed_.back().first;
    delayed_.emplace_back(due, std::move(bytes));
    return {};
  }
  return bytes;
}

}  // namespace veq::simulator
