#include "drivers/native_protocol.hpp"

#include <array>
#include <cctype>
#include <charconv>
#include <cmath>
#include <cstdio>

namespace veq::drivers::protocol {

namespace {

bool is_name_char(char c) {
  return (c >= 'a' && c <= 'z') || (c >= '0' && c <= '9') || c == '_';
}

bool needs_quotes(std::string_view value) {
  if (value.empty())
    return true;
  for (char c : value) {
    if (c == ' ' || c == '"' || c == '\\' || c == '*' || c == '=' ||
        static_cast<unsigned char>(c) < 0x20 || static_cast<unsigned char>(c) > 0x7e) {
      return true;
    }
  }
  return false;
}

Error garbled(std::string_view line, std::size_t column, const std::string& what) {
  std::string shown(line.substr(0, 80));
  for (char& c : shown) {
    if (static_cast<unsigned char>(c) < 0x20 || static_cast<unsigned char>(c) > 0x7e)
      c = '?';
  }
  return make_error(ErrorKind::garbled,
                    what + " at column " + std::to_string(column + 1) + " of '" + shown + "'");
}

}  // namespace

std::optional<std::string_view> Message::find(std::string_view name) const {
  for (const auto& f : fields) {
    if (f.name == name)
      return std::string_view(f.value);
  }
  return std::nullopt;
}

Result<double> Message::number(std::string_view name) const {
  auto v = find(name);
  if (!v) {
    return make_error(ErrorKind::garbled,
                      "'" + word + "' message lacks field '" + std::string(name) + "'");
  }
  double out = 0.0;
  const char* first = v->data();
  const char* last = v->data() + v->size();
  auto [ptr, ec] = std::from_chars(first, last, out);
  if (ec != std::errc() || ptr != last || !std::isfinite(out)) {
    return make_error(ErrorKind::garbled, "field '" + std::string(name) + "' is not a number: '" +
                                              std::string(*v) + "'");
  }
  return out;
}

Result<std::string> Message::text(std::string_view name) const {
  auto v = find(name);
  if (!v) {
    return make_error(ErrorKind::garbled,
                      "'" + word + "' message lacks field '" + std::string(name) + "'");
  }
  return std::string(*v);
}

Message& Message::add(std::string name, std::string value) {
  fields.push_back(Field{std::move(name), std::move(value)});
  return *this;
}

Message& Message::add(std::string name, double value, int decimals) {
  return add(std::move(name), format_number(value, decimals));
}

namespace {

// CRC-16/CCITT-FALSE one byte at a time from a 256-entry table, built at
// compile time from the bitwise definition (polynomial 0x1021): the
// checksum runs on both ends of every line, and bit by bit it took half of
// a simulated titration's time.
constexpr std::array<std::uint16_t, 256> make_crc_table() {
  std::array<std::uint16_t, 256> table{};
  for (unsigned byte = 0; byte < 256; ++byte) {
    auto crc = static_cast<std::uint16_t>(byte << 8);
    for (int bit = 0; bit < 8; ++bit)
      crc = (crc & 0x8000) ? static_cast<std::uint16_t>((crc << 1) ^ 0x1021)
                           : static_cast<std::uint16_t>(crc << 1);
    table[byte] = crc;
  }
  return table;
}
constexpr std::array<std::uint16_t, 256> kCrcTable = make_crc_table();

}  // namespace

std::uint16_t crc16_ccitt(std::string_view bytes) {
  std::uint16_t crc = 0xFFFF;
  for (unsigned char byte : bytes)
    crc = static_cast<std::uint16_t>((crc << 8) ^ kCrcTable[((crc >> 8) ^ byte) & 0xFF]);
  return crc;
}

std::string format_number(double value, int decimals) {
  if (!std::isfinite(value))
    return "nan";
  char buffer[64];
  // to_chars with fixed precision is locale-independent.
  auto [ptr, ec] = std::to_chars(buffer, buffer + sizeof buffer, value, std::chars_format::fixed,
                                 decimals < 0 ? 0 : decimals);
  if (ec != std::errc())
    return "nan";
  std::string out(buffer, ptr);
  if (out == "-0" || out.find_first_not_of("-0.") == std::string::npos) {
    if (!out.empty() && out[0] == '-')
      out.erase(0, 1);  // no "-0.000"
  }
  return out;
}

std::string encode(const Message& message) {
  std::string body = std::to_string(message.sequence) + " " + message.word;
  for (const auto& f : message.fields) {
    body += ' ';
    body += f.name;
    body += '=';
    if (needs_quotes(f.value)) {
      body += '"';
      for (char c : f.value) {
        if (c == '"' || c == '\\')
          body += '\\';
        // Control and non-ASCII bytes cannot travel in a line: replace them.
        body += (static_cast<unsigned char>(c) < 0x20 || static_cast<unsigned char>(c) > 0x7e) ? '?'
                                                                                               : c;
      }
      body += '"';
    } else {
      body += f.value;
    }
  }
  body += ' ';
  char crc[8];
  std::snprintf(crc, sizeof crc, "*%04X", static_cast<unsigned>(crc16_ccitt(body)));
  body += crc;
  body += '\n';
  return body;
}

Result<Message> parse(std::string_view line) {
  if (!line.empty() && line.back() == '\r')
    line.remove_suffix(1);
  const auto star = line.rfind('*');
  if (star == std::string_view::npos)
    return garbled(line, line.size(), "no checksum");
  if (line.size() - star != 5)
    return garbled(line, star, "checksum is not four hex digits");
  unsigned expected = 0;
  for (std::size_t i = star + 1; i < line.size(); ++i) {
    const char c = line[i];
    unsigned digit = 0;
    if (c >= '0' && c <= '9') {
      digit = static_cast<unsigned>(c - '0');
    } else if (c >= 'A' && c <= 'F') {
      digit = static_cast<unsigned>(c - 'A' + 10);
    } else {
      return garbled(line, i, "checksum is not four upper-case hex digits");
    }
    expected = expected * 16 + digit;
  }
  const std::string_view body = line.substr(0, star);
  if (crc16_ccitt(body) != expected)
    return garbled(line, star, "checksum mismatch");
  if (body.empty() || body.back() != ' ')
    return garbled(line, star, "no space before checksum");

  Message message;
  std::size_t i = 0;
  // Sequence number.
  std::size_t start = i;
  while (i < body.size() && std::isdigit(static_cast<unsigned char>(body[i])))
    ++i;
  if (i == start || i - start > 5)
    return garbled(line, start, "bad sequence number");
  {
    std::uint32_t seq = 0;
    std::from_chars(body.data() + start, body.data() + i, seq);
    if (seq > 65535)
      return garbled(line, start, "sequence number above 65535");
    message.sequence = seq;
  }
  if (i >= body.size() || body[i] != ' ')
    return garbled(line, i, "expected a space");
  ++i;
  start = i;
  while (i < body.size() && is_name_char(body[i]))
    ++i;
  if (i == start)
    return garbled(line, start, "missing message word");
  message.word = std::string(body.substr(start, i - start));

  while (i < body.size()) {
    if (body[i] != ' ')
      return garbled(line, i, "expected a space");
    ++i;
    if (i == body.size())
      break;  // the space before '*'
    start = i;
    while (i < body.size() && is_name_char(body[i]))
      ++i;
    if (i == start)
      return garbled(line, start, "bad field name");
    Field field;
    field.name = std::string(body.substr(start, i - start));
    if (i >= body.size() || body[i] != '=')
      return garbled(line, i, "expected '='");
    ++i;
    if (i < body.size() && body[i] == '"') {
      ++i;
      bool closed = false;
      while (i < body.size()) {
        const char c = body[i];
        if (c == '\\') {
          if (i + 1 >= body.size())
            return garbled(line, i, "unfinished escape");
          field.value += body[i + 1];
          i += 2;
        } else if (c == '"') {
          ++i;
          closed = true;
          break;
        } else {
          field.value += c;
          ++i;
        }
      }
      if (!closed)
        return garbled(line, i, "unterminated quoted value");
    } else {
      start = i;
      while (i < body.size() && body[i] != ' ') {
        const auto c = static_cast<unsigned char>(body[i]);
        if (c < 0x21 || c > 0x7e || c == '"' || c == '=') {
          return garbled(line, i, "bad character in value");
        }
        ++i;
      }
      if (i == start)
        return garbled(line, start, "empty value");
      field.value = std::string(body.substr(start, i - start));
    }
    message.fields.push_back(std::move(field));
  }
  return message;
}

Message ok_reply(std::uint32_t sequence) {
  Message m;
  m.sequence = sequence;
  m.word = "ok";
  return m;
}

Message error_reply(std::uint32_t sequence, std::string reason, std::string message) {
  Message m;
  m.sequence = sequence;
  m.word = "error";
  m.add("reason", std::move(reason));
  m.add("message", std::move(message));
  return m;
}

}  // namespace veq::drivers::protocol
