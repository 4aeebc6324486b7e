#include "controller/audit/audit.hpp"

#include <openssl/crypto.h>
#include <openssl/evp.h>
#include <openssl/hmac.h>
#include <openssl/rand.h>
#include <sys/stat.h>

#include <array>
#include <chrono>
#include <cstdio>
#include <cstdlib>
#include <ctime>
#include <fstream>
#include <sstream>

#include "common/hex.hpp"

namespace veq::controller::audit {

namespace {

veq::Error invalid(const std::string& what) {
  return veq::make_error(veq::ErrorKind::invalid_input, what);
}

std::string to_hex(const unsigned char* data, std::size_t size) {
  static constexpr char kDigits[] = "0123456789abcdef";
  std::string out(2 * size, '0');
  for (std::size_t i = 0; i < size; ++i) {
    out[2 * i] = kDigits[data[i] >> 4];
    out[2 * i + 1] = kDigits[data[i] & 15];
  }
  return out;
}

std::optional<std::vector<std::uint8_t>> from_hex(std::string_view hex) {
  if (hex.size() % 2 != 0)
    return std::nullopt;
  std::vector<std::uint8_t> out(hex.size() / 2);
  for (std::size_t i = 0; i < out.size(); ++i) {
    const int hi = hex_digit(hex[2 * i]), lo = hex_digit(hex[2 * i + 1]);
    if (hi < 0 || lo < 0)
      return std::nullopt;
    out[i] = static_cast<std::uint8_t>(16 * hi + lo);
  }
  return out;
}

bool equal_in_constant_time(std::string_view a, std::string_view b) {
  return a.size() == b.size() && CRYPTO_memcmp(a.data(), b.data(), a.size()) == 0;
}

}  // namespace

const char* role_name(Role role) noexcept {
  switch (role) {
    case Role::analyst:
      return "analyst";
    case Role::reviewer:
      return "reviewer";
    case Role::administrator:
      return "administrator";
  }
  return "analyst";
}

std::optional<Role> role_from_name(std::string_view name) {
  for (Role r : {Role::analyst, Role::reviewer, Role::administrator}) {
    if (name == role_name(r))
      return r;
  }
  return std::nullopt;
}

const char* permission_name(Permission permission) noexcept {
  switch (permission) {
    case Permission::run_titrations:
      return "run titrations";
    case Permission::evaluate:
      return "evaluate";
    case Permission::sign_off:
      return "sign off results";
    case Permission::change_methods:
      return "change methods";
    case Permission::manage_users:
      return "manage users";
  }
  return "?";
}

bool allowed(Role role, Permission permission) noexcept {
  switch (permission) {
    case Permission::run_titrations:
    case Permission::evaluate:
      return true;
    case Permission::sign_off:
      return role == Role::reviewer || role == Role::administrator;
    case Permission::change_methods:
    case Permission::manage_users:
      return role == Role::administrator;
  }
  return false;
}

veq::Result<void> validate_user_name(std::string_view name) {
  if (name.empty() || name.size() > 64)
    return invalid("a user name has 1 to 64 characters");
  for (std::size_t i = 0; i < name.size(); ++i) {
    const char c = name[i];
    const bool ok = (c >= 'a' && c <= 'z') || (c >= 'A' && c <= 'Z') || (c >= '0' && c <= '9') ||
                    c == '.' || c == '-' || c == '_';
    if (!ok) {
      return invalid("user name '" + std::string(name) + "', character " + std::to_string(i + 1) +
                     ": only letters, digits, '.', '-' and '_' are allowed");
    }
  }
  return {};
}

veq::Result<std::vector<std::uint8_t>> scrypt(std::string_view password,
                                              const std::vector<std::uint8_t>& salt,
                                              std::uint64_t n, std::uint64_t r, std::uint64_t p,
                                              std::size_t length) {
  std::vector<std::uint8_t> key(length);
  // Memory: 128 r N bytes for the big array, plus 128 r p; allow twice.
  const std::uint64_t memory = 2 * (128 * r * n + 128 * r * p) + (1u << 20);
  if (EVP_PBE_scrypt(password.data(), password.size(), salt.data(), salt.size(), n, r, p, memory,
                     key.data(), key.size()) != 1) {
    return veq::make_error(veq::ErrorKind::invalid_input, "scrypt refused its parameters");
  }
  return key;
}

veq::Result<std::string> hash_password(std::string_view password, const PasswordCost& cost) {
  if (password.size() < 8)
    return invalid("a password needs at least 8 characters");
  if (cost.log2_n < 10 || cost.log2_n > 22 || cost.r < 1 || cost.r > 32 || cost.p < 1 ||
      cost.p > 16)
    return invalid("password cost out of range");
  std::vector<std::uint8_t> salt(16);
  if (RAND_bytes(salt.data(), static_cast<int>(salt.size())) != 1)
    return veq::make_error(veq::ErrorKind::io, "no random bytes for the salt");
  auto key = scrypt(password, salt, std::uint64_t{1} << cost.log2_n,
                    static_cast<std::uint64_t>(cost.r), static_cast<std::uint64_t>(cost.p), 32);
  if (!key)
    return key.error();
  return "scrypt$" + std::to_string(cost.log2_n) + "$" + std::to_string(cost.r) + "$" +
         std::to_string(cost.p) + "$" + to_hex(salt.data(), salt.size()) + "$" +
         to_hex(key->data(), key->size());
}

bool verify_password(std::string_view password, std::string_view stored) {
  std::vector<std::string> parts;
  std::string current;
  for (char c : stored) {
    if (c == '$') {
      parts.push_back(current);
      current.clear();
    } else {
      current += c;
    }
  }
  parts.push_back(current);
  if (parts.size() != 6 || parts[0] != "scrypt")
    return false;
  int log2_n = 0, r = 0, p = 0;
  try {
    log2_n = std::stoi(parts[1]);
    r = std::stoi(parts[2]);
    p = std::stoi(parts[3]);
  } catch (const std::exception&) {
    return false;
  }
  if (log2_n < 10 || log2_n > 22 || r < 1 || r > 32 || p < 1 || p > 16)
    return false;
  const auto salt = from_hex(parts[4]);
  const auto expected = from_hex(parts[5]);
  if (!salt || !expected || expected->empty())
    return false;
  auto key = scrypt(password, *salt, std::uint64_t{1} << log2_n, static_cast<std::uint64_t>(r),
                    static_cast<std::uint64_t>(p), expected->size());
  if (!key)
    return false;
  return CRYPTO_memcmp(key->data(), expected->data(), key->size()) == 0;
}

std::string sha256_hex(std::string_view data) {
  std::array<unsigned char, EVP_MAX_MD_SIZE> digest{};
  unsigned int size = 0;
  EVP_Digest(data.data(), data.size(), digest.data(), &size, EVP_sha256(), nullptr);
  return to_hex(digest.data(), size);
}

std::string hmac_sha256_hex(const std::vector<std::uint8_t>& key, std::string_view data) {
  std::array<unsigned char, EVP_MAX_MD_SIZE> mac{};
  unsigned int size = 0;
  HMAC(EVP_sha256(), key.data(), static_cast<int>(key.size()),
       reinterpret_cast<const unsigned char*>(data.data()), data.size(), mac.data(), &size);
  return to_hex(mac.data(), size);
}

const std::string& genesis_hash() {
  static const std::string zeros(64, '0');
  return zeros;
}

std::string record_hash(const AuditRecord& r) {
  std::string text;
  auto field = [&](std::string_view value) {
    text += std::to_string(value.size());
    text += ':';
    text += value;
    text += ';';
  };
  field(r.previous_hash);
  field(std::to_string(r.sequence));
  field(r.at_utc);
  field(r.user);
  field(r.action);
  field(r.subject);
  field(r.old_value);
  field(r.new_value);
  field(r.reason);
  return sha256_hex(text);
}

void chain(AuditRecord& record, const AuditRecord* last) {
  record.sequence = last ? last->sequence + 1 : 1;
  record.previous_hash = last ? last->hash : genesis_hash();
  record.hash = record_hash(record);
}

std::string head_tag(const std::vector<std::uint8_t>& key, std::int64_t sequence,
                     std::string_view hash) {
  return hmac_sha256_hex(key,
                         "veq audit head " + std::to_string(sequence) + " " + std::string(hash));
}

Verification verify(const std::vector<AuditRecord>& records, std::int64_t head_sequence,
                    std::string_view head_tag_hex, const std::vector<std::uint8_t>& key) {
  Verification v;
  v.records = records.size();
  std::string previous = genesis_hash();
  for (std::size_t i = 0; i < records.size(); ++i) {
    const AuditRecord& r = records[i];
    const auto expected_sequence = static_cast<std::int64_t>(i + 1);
    auto fail = [&](const std::string& what) {
      v.first_bad_sequence = expected_sequence;
      v.problem = "record " + std::to_string(expected_sequence) + ": " + what;
      return v;
    };
    if (r.sequence != expected_sequence) {
      return fail("found sequence " + std::to_string(r.sequence) +
                  " (a record is missing or was inserted)");
    }
    if (r.previous_hash != previous)
      return fail(
          "does not follow the record before it (a record before it was changed, "
          "removed or inserted)");
    if (record_hash(r) != r.hash)
      return fail("its content does not match its hash (the record was changed)");
    previous = r.hash;
  }
  if (records.empty() && head_sequence == 0 && head_tag_hex.empty()) {
    v.intact = true;
    return v;
  }
  const std::int64_t last = static_cast<std::int64_t>(records.size());
  if (head_sequence != last) {
    v.first_bad_sequence = std::min(head_sequence, last) + 1;
    v.problem = "the keyed head names record " + std::to_string(head_sequence) + " but the trail " +
                "ends at record " + std::to_string(last) +
                (head_sequence > last ? " (records were removed from the end)"
                                      : " (records were added without the key)");
    return v;
  }
  if (!equal_in_constant_time(head_tag(key, last, previous), head_tag_hex)) {
    v.first_bad_sequence = last;
    v.problem = "the keyed head does not fit the last record " + std::to_string(last) +
                " (the trail was rewritten without the key, or this is not its key)";
    return v;
  }
  v.intact = true;
  return v;
}

veq::Result<std::vector<std::uint8_t>> load_key(const std::filesystem::path& path, bool create) {
  std::error_code ec;
  if (!std::filesystem::exists(path, ec)) {
    if (!create)
      return veq::make_error(veq::ErrorKind::not_found,
                             "audit key file " + path.string() + " does not exist");
    std::vector<std::uint8_t> key(32);
    if (RAND_bytes(key.data(), static_cast<int>(key.size())) != 1)
      return veq::make_error(veq::ErrorKind::io, "no random bytes for the audit key");
    const std::string hex = to_hex(key.data(), key.size()) + "\n";
    // Created readable by its owner only before anything is written.
    const mode_t old_mask = ::umask(077);
    std::FILE* f = std::fopen(path.c_str(), "wx");
    ::umask(old_mask);
    if (!f)
      return veq::make_error(veq::ErrorKind::storage,
                             "cannot create audit key file " + path.string());
    const bool written = std::fwrite(hex.data(), 1, hex.size(), f) == hex.size();
    const bool closed = std::fclose(f) == 0;
    if (!written || !closed)
      return veq::make_error(veq::ErrorKind::storage,
                             "cannot write audit key file " + path.string());
    return key;
  }
  struct stat info {};
  if (::stat(path.c_str(), &info) != 0)
    return veq::make_error(veq::ErrorKind::storage, "cannot read audit key file " + path.string());
  if ((info.st_mode & 077) != 0) {
    return veq::make_error(
        veq::ErrorKind::invalid_input,
        "audit key file " + path.string() + " is readable by others: make it private (chmod 600)");
  }
  std::ifstream in(path);
  std::stringstream text;
  text << in.rdbuf();
  std::string hex = text.str();
  while (!hex.empty() && (hex.back() == '\n' || hex.back() == '\r' || hex.back() == ' '))
    hex.pop_back();
  const auto key = from_hex(hex);
  if (!in || !key || key->size() != 32) {
    return veq::make_error(veq::ErrorKind::invalid_input,
                           "audit key file " + path.string() + " does not hold 64 hex digits");
  }
  return *key;
}

std::filesystem::path default_key_path(const std::filesystem::path& database) {
  if (const char* env = std::getenv("VEQ_AUDIT_KEY"); env && *env)
    return env;
  return database.string() + ".audit-key";
}

std::string now_utc() {
  const auto now = std::chrono::system_clock::now();
  const std::time_t seconds = std::chrono::system_clock::to_time_t(now);
  const auto millis =
      std::chrono::duration_cast<std::chrono::milliseconds>(now.time_since_epoch()).count() % 1000;
  std::tm utc{};
  ::gmtime_r(&seconds, &utc);
  char text[96];
  std::snprintf(text, sizeof text, "%04d-%02d-%02dT%02d:%02d:%02d.%03dZ", utc.tm_year + 1900,
                utc.tm_mon + 1, utc.tm_mday, utc.tm_hour, utc.tm_min, utc.tm_sec,
                static_cast<int>(millis));
  return text;
}

}  // namespace veq::controller::audit
