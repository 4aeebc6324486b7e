// The series view's queue as rows of text cells, the way a spreadsheet holds
// them, and its conversion to and from a series (controller/series). Without
// Qt, so that the rules that name a bad row and column are tested directly.
#pragma once

#include <array>
#include <optional>
#include <string>
#include <string_view>
#include <vector>

#include "common/result.hpp"
#include "controller/series/series.hpp"

namespace veq::ui {

/// The queue's columns, in the order shown and pasted.
enum class QueueColumn : int {
  sample_id = 0,
  kind = 1,
  method = 2,
  replicates = 3,
  size = 4,  ///< one number for every replicate, or one per replicate
  unit = 5,  ///< "mL" (aliquot), "g" (weighed), "g from balance"
  dilution = 6,
  density = 7,
  positions = 8,
};
inline constexpr int kQueueColumnCount = 9;
/// The column titles, units included: "Size", "Density (g/mL)"...
const char* queue_column_title(QueueColumn column);

/// The units the Unit column accepts.
inline constexpr const char* kAliquotUnit = "mL";
inline constexpr const char* kMassUnit = "g";
inline constexpr const char* kBalanceUnit = "g from balance";

struct QueueRow {
  std::array<std::string, kQueueColumnCount> cells;
  /// The entry the row was made from when it came from a series file: it
  /// carries what the table does not show (a titer's standard, a
  /// calibration's standards, a check standard's expected value).
  std::optional<series::Entry> original;
  std::string& cell(QueueColumn c) { return cells[static_cast<std::size_t>(c)]; }
  const std::string& cell(QueueColumn c) const { return cells[static_cast<std::size_t>(c)]; }
};

/// A row with every cell empty (skipped when the queue becomes a series,
/// without changing the numbers of the rows after it).
bool row_is_empty(const QueueRow& row);

/// Rows pasted from a spreadsheet: one line per row, cells separated by tabs,
/// in the order of the columns (missing cells at the end stay empty; a first
/// line starting with "Sample ID" is taken as the header and skipped). Each
/// row is checked as row_to_entry() checks it; `first_row` is the number the
/// first pasted row gets in the table (1-based), so that an error names the
/// row the user sees: "row 4, column Replicates: 'two' is not a whole
/// number".
Result<std::vector<QueueRow>> parse_pasted_rows(std::string_view text, int first_row);

/// One row as a series entry. Errors (invalid_input) start with
/// "row <row_number>, column <title>:" and say what is expected.
Result<series::Entry> row_to_entry(const QueueRow& row, int row_number);

/// The row showing an entry (its hidden fields kept in `original`).
QueueRow entry_to_row(const series::Entry& entry);

/// The whole queue as a series (empty rows skipped; rows keep their numbers
/// in messages): every row checked, a position used by two
/// rows refused (naming both), then the controller's own checks of the
/// series file (series_file.hpp).
Result<series::Series> rows_to_series(const std::vector<QueueRow>& rows, const std::string& name,
                                      int check_standard_every);

/// The size cell of an entry's portions, "50" or "0.2503, 0.2511".
std::string portions_text(const std::vector<series::Portion>& portions);

}  // namespace veq::ui
