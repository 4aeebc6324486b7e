// Request/reply over a transport in veq's native protocol: sequence numbers,
// deadlines, stale replies, error replies, streamed readings.
#pragma once

#include <chrono>
#include <cstdint>
#include <string>

#include "common/result.hpp"
#include "drivers/clock.hpp"
#include "drivers/device_channel.hpp"
#include "drivers/native_protocol.hpp"
#include "drivers/transport.hpp"

namespace veq::drivers {

/// One device speaking veq's native protocol at the end of one transport.
///
/// call() (from DeviceChannel) numbers each request; a reply for an older
/// request (left over after a timeout) is skipped; a message with sequence 0
/// and a word other than "ok" or "error" is a streamed reading and is kept for
/// next_unsolicited(). A line that cannot be parsed is ErrorKind::garbled; an
/// "error" reply is ErrorKind::device_refused with the device's reason; no
/// reply in time is ErrorKind::timeout.
class DeviceLink final : public DeviceChannel {
 public:
  DeviceLink(Transport& transport, Clock& clock, std::string device_name, LinkOptions options = {});

 protected:
  Result<protocol::Message> exchange(protocol::Message request) override;
  Result<std::optional<protocol::Message>> read_unsolicited(
      std::chrono::milliseconds timeout) override;

 private:
  std::uint32_t next_sequence_ = 1;
};

}  // namespace veq::drivers
