#include "ui/queue_table.hpp"

#include <cctype>
#include <charconv>
#include <cmath>
#include <map>
#include <sstream>

#include "controller/series/series_file.hpp"

namespace veq::ui {

namespace {

std::string trim(std::string_view s) {
  std::size_t b = 0;
  std::size_t e = s.size();
  while (b < e && std::isspace(static_cast<unsigned char>(s[b])))
    ++b;
  while (e > b && std::isspace(static_cast<unsigned char>(s[e - 1])))
    --e;
  return std::string(s.substr(b, e - b));
}

std::string lower(std::string s) {
  for (char& c : s)
    c = static_cast<char>(std::tolower(static_cast<unsigned char>(c)));
  return s;
}

/// A number written plainly ("0.2503", "50", "1e-3"); a decimal comma is
/// refused by the caller's message.
std::optional<double> number(std::string_view text) {
  const std::string t = trim(text);
  double x = 0.0;
  auto [ptr, ec] = std::from_chars(t.data(), t.data() + t.size(), x);
  if (ec != std::errc() || ptr != t.data() + t.size() || t.empty() || !std::isfinite(x))
    return std::nullopt;
  return x;
}

/// Items of a list cell: separated by commas, semicolons or spaces.
std::vector<std::string> items(std::string_view text) {
  std::vector<std::string> out;
  std::string current;
  for (char c : text) {
    if (c == ',' || c == ';' || std::isspace(static_cast<unsigned char>(c))) {
      if (!current.empty())
        out.push_back(current);
      current.clear();
    } else {
      current += c;
    }
  }
  if (!current.empty())
    out.push_back(current);
  return out;
}

std::string format_number(double x) {
  std::ostringstream s;
  s.precision(10);
  s << x;
  return s.str();
}

class RowErrors {
 public:
  explicit RowErrors(int row) : row_(row) {}
  Error at(QueueColumn column, const std::string& what) const {
    return make_error(ErrorKind::invalid_input, "row " + std::to_string(row_) + ", column " +
                                                    queue_column_title(column) + ": " + what);
  }

 private:
  int row_;
};

}  // namespace

const char* queue_column_title(QueueColumn column) {
  switch (column) {
    case QueueColumn::sample_id:
      return "Sample ID";
    case QueueColumn::kind:
      return "Kind";
    case QueueColumn::method:
      return "Method";
    case QueueColumn::replicates:
      return "Replicates";
    case QueueColumn::size:
      return "Size";
    case QueueColumn::unit:
      return "Unit";
    case QueueColumn::dilution:
      return "Dilution factor";
    case QueueColumn::density:
      return "Density (g/mL)";
    case QueueColumn::positions:
      return "Positions";
  }
  return "";
}

std::string portions_text(const std::vector<series::Portion>& portions) {
  std::string text;
  for (const auto& p : portions) {
    const double v = p.mass_g > 0.0 ? p.mass_g : p.aliquot_ml;
    if (p.from_balance && p.mass_g <= 0.0)
      continue;  // still to weigh
    text += (text.empty() ? "" : ", ") + format_number(v);
  }
  return text;
}

Result<series::Entry> row_to_entry(const QueueRow& row, int row_number) {
  const RowErrors err(row_number);
  using series::EntryKind;
  const std::string kind_text = trim(row.cell(QueueColumn::kind));
  const auto kind = series::entry_kind_from_name(kind_text.empty() ? "sample" : lower(kind_text));
  if (!kind) {
    return err.at(QueueColumn::kind, "'" + kind_text +
                                         "' is not a kind of entry (sample, blank, conditioning, "
                                         "check standard, titer, calibration, burette check)");
  }
  const bool needs_file = *kind == EntryKind::titer || *kind == EntryKind::calibration ||
                          *kind == EntryKind::burette_check || *kind == EntryKind::check_standard;
  if (needs_file && !(row.original && row.original->kind == *kind)) {
    return err.at(QueueColumn::kind,
                  std::string("a ") + series::entry_kind_name(*kind) +
                      " entry needs details the table does not show (standards, expected "
                      "value...); open it from a series file (File > Open series file)");
  }
  series::Entry e = row.original && row.original->kind == *kind ? *row.original : series::Entry{};
  e.kind = *kind;
  e.id = trim(row.cell(QueueColumn::sample_id));
  if (e.id.empty() && (*kind == EntryKind::sample || *kind == EntryKind::check_standard))
    return err.at(QueueColumn::sample_id, "empty; every sample needs its identity");
  if (e.id.empty())
    e.id = series::entry_kind_name(*kind);

  const bool titrates = *kind != EntryKind::calibration && *kind != EntryKind::burette_check;
  if (titrates) {
    e.method = trim(row.cell(QueueColumn::method));
    if (e.method.empty())
      return err.at(QueueColumn::method, "empty; give the name of a stored method");
    const std::string reps = trim(row.cell(QueueColumn::replicates));
    e.replicates = 0;
    if (!reps.empty()) {
      const auto r = number(reps);
      if (!r || *r != std::floor(*r) || *r < 0 || *r > 20)
        return err.at(QueueColumn::replicates,
                      "'" + reps + "' is not a whole number from 0 to 20 (0: the method's own)");
      e.replicates = static_cast<int>(*r);
    }
  }

  // Positions: "11, 12, 13" or a range "11-13".
  e.positions.clear();
  const std::string positions = trim(row.cell(QueueColumn::positions));
  for (const auto& item : items(positions)) {
    const auto dash = item.find('-');
    std::optional<double> from = number(item.substr(0, dash));
    std::optional<double> to = dash == std::string::npos ? from : number(item.substr(dash + 1));
    if (!from || !to || *from != std::floor(*from) || *to != std::floor(*to) || *from < 1 ||
        *to < *from || *to - *from > 100)
      return err.at(QueueColumn::positions,
                    "'" + item + "' is not a position number from 1 up or a range like 11-13");
    for (int p = static_cast<int>(*from); p <= static_cast<int>(*to); ++p)
      e.positions.push_back(p);
  }
  if (e.positions.empty())
    return err.at(QueueColumn::positions,
                  "empty; give the sample changer positions, one per replicate (11, 12 or 11-12)");
  if (e.replicates > 0 && static_cast<int>(e.positions.size()) < e.replicates &&
      *kind != EntryKind::check_standard)
    return err.at(QueueColumn::positions, std::to_string(e.positions.size()) + " positions for " +
                                              std::to_string(e.replicates) +
                                              " replicates; give one position per replicate");

  // Sizes with their unit.
  const std::string unit = lower(trim(row.cell(QueueColumn::unit)));
  const std::string size = trim(row.cell(QueueColumn::size));
  const bool has_portions = *kind != EntryKind::calibration && *kind != EntryKind::burette_check;
  if (has_portions) {
    std::vector<series::Portion> portions;
    if (unit == kBalanceUnit || (unit == kMassUnit && lower(size) == "balance")) {
      if (*kind != EntryKind::sample && *kind != EntryKind::check_standard &&
          *kind != EntryKind::titer)
        return err.at(QueueColumn::unit, std::string("a ") + series::entry_kind_name(*kind) +
                                             " takes aliquots in mL, not masses");
      const auto values = items(size);
      if (values.empty() || lower(size) == "balance") {
        // One portion to weigh per position, as "masses = balance" reads.
        portions.assign(e.positions.size(), series::Portion{0.0, 0.0, true});
      } else {
        for (const auto& v : values) {
          const auto x = number(v);
          if (!x || *x <= 0.0 || *x > 1000.0)
            return err.at(QueueColumn::size, "'" + v +
                                                 "' is not a mass in g above 0 (use a decimal "
                                                 "point: 0.2503)");
          portions.push_back(series::Portion{0.0, *x, true});
        }
      }
    } else if (unit == kAliquotUnit || unit == "ml" || unit == kMassUnit) {
      const bool mass = unit == kMassUnit;
      if (mass && *kind != EntryKind::sample && *kind != EntryKind::check_standard &&
          *kind != EntryKind::titer)
        return err.at(QueueColumn::unit, std::string("a ") + series::entry_kind_name(*kind) +
                                             " takes aliquots in mL, not masses");
      const auto values = items(size);
      if (values.empty())
        return err.at(QueueColumn::size, std::string("empty; give the ") +
                                             (mass ? "mass in g" : "aliquot volume in mL") +
                                             " of each replicate");
      for (const auto& v : values) {
        const auto x = number(v);
        if (!x || *x <= 0.0 || *x > 1000.0)
          return err.at(QueueColumn::size, "'" + v + "' is not " +
                                               (mass ? "a mass in g" : "a volume in mL") +
                                               " above 0 (use a decimal point: 0.2503)");
        portions.push_back(mass ? series::Portion{0.0, *x, false}
                                : series::Portion{*x, 0.0, false});
      }
    } else {
      return err.at(QueueColumn::unit, "'" + row.cell(QueueColumn::unit) +
                                           "' is not a unit of size; use mL (an aliquot), g (a "
                                           "weighed portion) or 'g from balance'");
    }
    if (portions.size() > 1 && portions.size() != e.positions.size())
      return err.at(QueueColumn::size,
                    std::to_string(portions.size()) + " sizes for " +
                        std::to_string(e.positions.size()) +
                        " positions; give one size for all or one per position (a decimal "
                        "comma splits a number in two: use a decimal point)");
    e.portions = std::move(portions);
  }

  const std::string dilution = trim(row.cell(QueueColumn::dilution));
  e.dilution_factor = 1.0;
  if (!dilution.empty()) {
    const auto d = number(dilution);
    if (!d || *d < 1.0 || *d > 1e6)
      return err.at(QueueColumn::dilution, "'" + dilution +
                                               "' is not a dilution factor from 1 (none) up: "
                                               "final volume over original volume or mass");
    e.dilution_factor = *d;
  }
  const std::string density = trim(row.cell(QueueColumn::density));
  e.density_g_per_ml = 0.0;
  if (!density.empty()) {
    const auto d = number(density);
    if (!d || *d < 0.0 || *d > 25.0)
      return err.at(QueueColumn::density,
                    "'" + density + "' is not a density in g/mL from 0 (unknown) to 25");
    e.density_g_per_ml = *d;
  }
  if ((*kind == EntryKind::blank || *kind == EntryKind::conditioning) &&
      (e.dilution_factor != 1.0 || e.density_g_per_ml != 0.0)) {
    return err.at(e.dilution_factor != 1.0 ? QueueColumn::dilution : QueueColumn::density,
                  std::string("a ") + series::entry_kind_name(*kind) +
                      " has no dilution or density; leave the cell empty");
  }
  return e;
}

QueueRow entry_to_row(const series::Entry& entry) {
  QueueRow row;
  row.original = entry;
  row.cell(QueueColumn::sample_id) = entry.id;
  row.cell(QueueColumn::kind) = series::entry_kind_name(entry.kind);
  row.cell(QueueColumn::method) = entry.method;
  if (entry.replicates > 0)
    row.cell(QueueColumn::replicates) = std::to_string(entry.replicates);
  if (!entry.portions.empty()) {
    row.cell(QueueColumn::size) = portions_text(entry.portions);
    const auto& p = entry.portions.front();
    row.cell(QueueColumn::unit) = p.from_balance   ? kBalanceUnit
                                  : p.mass_g > 0.0 ? kMassUnit
                                                   : kAliquotUnit;
  }
  if (entry.dilution_factor != 1.0)
    row.cell(QueueColumn::dilution) = format_number(entry.dilution_factor);
  if (entry.density_g_per_ml > 0.0)
    row.cell(QueueColumn::density) = format_number(entry.density_g_per_ml);
  std::string positions;
  for (int p : entry.positions)
    positions += (positions.empty() ? "" : ", ") + std::to_string(p);
  row.cell(QueueColumn::positions) = positions;
  return row;
}

Result<std::vector<QueueRow>> parse_pasted_rows(std::string_view text, int first_row) {
  std::vector<QueueRow> rows;
  std::size_t start = 0;
  bool first_line = true;
  while (start <= text.size()) {
    std::size_t end = text.find('\n', start);
    if (end == std::string_view::npos)
      end = text.size();
    std::string_view line = text.substr(start, end - start);
    start = end + 1;
    if (!line.empty() && line.back() == '\r')
      line.remove_suffix(1);
    const bool header = first_line && lower(trim(line.substr(0, line.find('\t')))) == "sample id";
    first_line = false;
    if (trim(line).empty() || header) {
      if (end == text.size())
        break;
      continue;
    }
    QueueRow row;
    std::size_t cell_start = 0;
    int column = 0;
    while (true) {
      const std::size_t tab = line.find('\t', cell_start);
      const std::string_view cell = line.substr(
          cell_start, tab == std::string_view::npos ? std::string_view::npos : tab - cell_start);
      if (column >= kQueueColumnCount) {
        if (!trim(cell).empty()) {
          return make_error(ErrorKind::invalid_input,
                            "row " + std::to_string(first_row + static_cast<int>(rows.size())) +
                                ", column " + std::to_string(column + 1) + ": '" +
                                std::string(cell) + "' lies beyond the queue's " +
                                std::to_string(kQueueColumnCount) +
                                " columns (Sample ID, Kind, Method, Replicates, Size, Unit, "
                                "Dilution factor, Density, Positions)");
        }
      } else {
        row.cells[static_cast<std::size_t>(column)] = trim(cell);
      }
      ++column;
      if (tab == std::string_view::npos)
        break;
      cell_start = tab + 1;
    }
    if (row.cell(QueueColumn::kind).empty())
      row.cell(QueueColumn::kind) = "sample";
    if (auto checked = row_to_entry(row, first_row + static_cast<int>(rows.size())); !checked)
      return checked.error();
    rows.push_back(std::move(row));
    if (end == text.size())
      break;
  }
  if (rows.empty())
    return make_error(ErrorKind::invalid_input,
                      "nothing to paste: copy rows of a spreadsheet (cells separated by tabs) "
                      "in the order Sample ID, Kind, Method, Replicates, Size, Unit, Dilution "
                      "factor, Density, Positions");
  return rows;
}

bool row_is_empty(const QueueRow& row) {
  for (const auto& c : row.cells)
    if (!trim(c).empty())
      return false;
  return true;
}

Result<series::Series> rows_to_series(const std::vector<QueueRow>& rows, const std::string& name,
                                      int check_standard_every) {
  series::Series s;
  s.name = name.empty() ? "series" : name;
  s.check_standard_every = check_standard_every;
  std::map<int, int> position_row;
  for (std::size_t i = 0; i < rows.size(); ++i) {
    const int row = static_cast<int>(i) + 1;
    if (row_is_empty(rows[i]))
      continue;
    auto e = row_to_entry(rows[i], row);
    if (!e)
      return e.error();
    for (int p : e->positions) {
      auto [it, fresh] = position_row.emplace(p, row);
      if (!fresh) {
        return RowErrors(row).at(QueueColumn::positions, "position " + std::to_string(p) +
                                                             " is already used by row " +
                                                             std::to_string(it->second) +
                                                             "; each vessel has its own position");
      }
    }
    s.entries.push_back(std::move(e).value());
  }
  if (s.entries.empty())
    return make_error(ErrorKind::invalid_input,
                      "the queue is empty; add rows (Insert), paste them from a spreadsheet "
                      "(Ctrl+V) or open a series file");
  // The controller's own checks of the whole series (the same as for a
  // series file), so that the queue never starts what `veq series check`
  // would refuse.
  auto checked = series::parse_series(series::write_series(s), "the queue");
  if (!checked)
    return checked.error();
  return s;
}

}  // namespace veq::ui
