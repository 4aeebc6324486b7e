// Who may do what, passwords, and the tamper-evident audit trail: records
// chained by SHA-256, the chain's head keyed with HMAC-SHA-256 by a secret
// kept outside the database file, so that someone who edits the file cannot
// simply recompute the chain. Pure computation and one key file; the store
// keeps the records.
#pragma once

#include <cstdint>
#include <filesystem>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include "common/result.hpp"

namespace veq::controller::audit {

// ---------------------------------------------------------------------------
// Users and roles

/// What a user may do follows from one role.
enum class Role : int {
  analyst = 0,        ///< runs series, evaluates, comments
  reviewer = 1,       ///< an analyst who may also sign results off
  administrator = 2,  ///< may also change methods and manage users
};
const char* role_name(Role role) noexcept;
std::optional<Role> role_from_name(std::string_view name);

/// The actions that need a permission.
enum class Permission : int {
  run_titrations = 0,
  evaluate = 1,        ///< re-evaluate, choose the evaluation a result uses
  sign_off = 2,        ///< a reviewer's signature on a result
  change_methods = 3,  ///< save a new method version
  manage_users = 4,
};
const char* permission_name(Permission permission) noexcept;

/// Whether `role` grants `permission`. Reviewers sign off but do not change
/// methods; only administrators change methods and users (the person who
/// writes a method is not the one who approves results made with it).
bool allowed(Role role, Permission permission) noexcept;

/// A user name: 1 to 64 characters of letters, digits, '.', '-' and '_'.
veq::Result<void> validate_user_name(std::string_view name);

// ---------------------------------------------------------------------------
// Passwords

/// Cost of the password hash: scrypt (RFC 7914) with N = 2^log2_n, r, p.
/// Defaults N = 2^15, r = 8, p = 1: 32 MiB and about 0.1 s per hash on the
/// build machine, the interactive-login setting of RFC 7914 section 2
/// (recalled from memory).
struct PasswordCost {
  int log2_n = 15;
  int r = 8;
  int p = 1;
};

/// The password's salted hash as one text field:
/// "scrypt$<log2 N>$<r>$<p>$<salt hex>$<hash hex>", with a random 16-byte
/// salt from OpenSSL's generator. Error for an empty password or one
/// shorter than 8 characters.
veq::Result<std::string> hash_password(std::string_view password, const PasswordCost& cost = {});

/// Whether `password` matches a stored hash (compared in constant time).
/// False, not an error, for a malformed stored hash.
bool verify_password(std::string_view password, std::string_view stored);

/// The raw scrypt key (for checking against RFC 7914's test vectors).
veq::Result<std::vector<std::uint8_t>> scrypt(std::string_view password,
                                              const std::vector<std::uint8_t>& salt,
                                              std::uint64_t n, std::uint64_t r, std::uint64_t p,
                                              std::size_t length);

// ---------------------------------------------------------------------------
// Hashes

/// Lower-case hex of SHA-256 (FIPS 180-4) of `data`.
std::string sha256_hex(std::string_view data);
/// Lower-case hex of HMAC-SHA-256 (RFC 2104) of `data` under `key`.
std::string hmac_sha256_hex(const std::vector<std::uint8_t>& key, std::string_view data);

// ---------------------------------------------------------------------------
// The chain

/// One entry of the audit trail: who did what to which thing, when, with
/// the old and new values and the reason.
struct AuditRecord {
  std::int64_t sequence = 0;  ///< 1, 2, 3 ... without gaps
  std::string at_utc;         ///< ISO 8601, e.g. 2026-12-02T06:10:00.123Z
  std::string user;
  std::string action;   ///< e.g. "create", "change", "evaluate", "sign off"
  std::string subject;  ///< e.g. "run 12", "method hardness version 3"
  std::string old_value;
  std::string new_value;
  std::string reason;
  std::string previous_hash;  ///< hash of record sequence - 1; 64 zeros for the first
  std::string hash;           ///< sha256(previous_hash + canonical fields)
};

/// The hash a record must carry: SHA-256 over the previous hash and every
/// field, each preceded by its length so that no two different records
/// share one text.
std::string record_hash(const AuditRecord& record);

/// 64 zeros: the previous hash of the first record.
const std::string& genesis_hash();

/// Fills sequence, previous_hash and hash of `record` to follow `last`
/// (nullptr for the first record).
void chain(AuditRecord& record, const AuditRecord* last);

/// The keyed head of the chain: HMAC-SHA-256 of the last record's sequence
/// and hash. Stored beside the records; without the key nobody can make one
/// that fits an edited chain.
std::string head_tag(const std::vector<std::uint8_t>& key, std::int64_t sequence,
                     std::string_view hash);

/// The verdict of `verify`.
struct Verification {
  bool intact = false;
  std::size_t records = 0;
  /// The first record that fails, when one does.
  std::optional<std::int64_t> first_bad_sequence;
  /// What is wrong, in words, naming the record; empty when intact.
  std::string problem;
};

/// Checks the records in order (sequence 1, 2, 3 ..., each previous_hash
/// the hash before it, each hash recomputed) and the head: its sequence is
/// the last record's and its tag fits under `key`. Names the first record
/// that fails. An empty trail with no head is intact.
Verification verify(const std::vector<AuditRecord>& records, std::int64_t head_sequence,
                    std::string_view head_tag_hex, const std::vector<std::uint8_t>& key);

// ---------------------------------------------------------------------------
// The key

/// The audit key: 32 random bytes kept as 64 hex digits in a file of its
/// own, readable by its owner only (mode 0600), never in the database.
/// Reads it; creates it when `create` is set and the file does not exist.
/// Errors name the file: unreadable, not 64 hex digits, readable by others.
veq::Result<std::vector<std::uint8_t>> load_key(const std::filesystem::path& path, bool create);

/// The key file veq uses for a database: $VEQ_AUDIT_KEY when set, else
/// "<database>.audit-key" beside it. Keep a copy elsewhere: without it the
/// trail can no longer be proven intact.
std::filesystem::path default_key_path(const std::filesystem::path& database);

/// UTC now as ISO 8601 with milliseconds.
std::string now_utc();

}  // namespace veq::controller::audit
