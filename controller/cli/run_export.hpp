// Runs, points, evaluations and results out of the store as CSV or JSON, for
// spreadsheets and other programs. Qt-free: the command line and the tests
// use it directly. The columns are described in docs/reports.md.
#pragma once

#include <cstdint>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include <nlohmann/json.hpp>

#include "common/result.hpp"
#include "controller/store/run_store.hpp"

namespace veq::cli {

/// One CSV table. CSV holds one table per file because the four have
/// different rows; JSON holds them all, nested per run.
enum class ExportTable {
  runs,         ///< one row per run: sample, method, titrant, status
  points,       ///< one row per raw point
  evaluations,  ///< one row per endpoint of each evaluation
  results,      ///< one row per stored result
};
const char* export_table_name(ExportTable table) noexcept;
std::optional<ExportTable> export_table_from_name(std::string_view name);

/// The unit of a run's signal column by its detection::SignalKind value:
/// "mV", "pM", "pH", "absorbance", "%T"; "unknown" for a value this build
/// does not know (a newer file).
const char* signal_unit(int signal_kind) noexcept;

/// Every run id of the store, oldest first.
veq::Result<std::vector<std::int64_t>> all_run_ids(store::RunStore& store);

/// CSV text (RFC 4180: comma separated, fields with a comma, quote or line
/// break quoted, CRLF-free "\n" line ends) with a header line whose column
/// names carry their units (volume_ml, time_s...). Numbers are printed
/// with 10 significant digits: a value read back differs from the stored
/// one by at most 5e-10 of itself. Error not_found naming the run when a
/// run id does not exist.
veq::Result<std::string> export_csv(store::RunStore& store,
                                    const std::vector<std::int64_t>& run_ids, ExportTable table);

/// A JSON array with one object per run: the run's fields, its points,
/// evaluations (with endpoints) and results. Numbers keep every digit
/// (nlohmann's shortest round-trip form).
veq::Result<nlohmann::json> export_json(store::RunStore& store,
                                        const std::vector<std::int64_t>& run_ids);

/// Writes `text` to `path`, replacing it. The error names the path and the
/// system's reason (a missing folder, no permission).
veq::Result<void> write_text_file(const std::string& path, std::string_view text);

}  // namespace veq::cli
