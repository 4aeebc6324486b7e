// Titrants, calibrations and burette checks at a glance: each titrant with
// its titer in force and when it expires, each electrode's calibration,
// each burette's last gravimetric check, and the full history of the one
// selected. An expired record is shown in a clear colour AND says
// "EXPIRED" in words.
#pragma once

#include <functional>
#include <memory>
#include <string>

#include <QtWidgets/QWidget>

#include "common/result.hpp"
#include "controller/method/utc_time.hpp"
#include "controller/store/sqlite_store.hpp"
#include "ui/review/review_logic.hpp"
#include "ui/review/review_support.hpp"

class QLabel;
class QTableWidget;

namespace veq::ui::review {

class ReviewChart;

class SuppliesView : public QWidget {
  Q_OBJECT

 public:
  explicit SuppliesView(QWidget* parent = nullptr);
  ~SuppliesView() override;

  /// Shows the store's titrants, calibrations and burette checks (not owned;
  /// nullptr detaches).
  Result<void> set_store(store::SqliteStore* store);
  Result<void> reload();
  /// The time expiry is judged at (the system clock by default; tests and
  /// screenshots fix it).
  void set_clock(std::function<method::TimePoint()> now);

  /// The overview table: one row per titrant, electrode and burette.
  QTableWidget* overview() const { return overview_; }
  /// The status words of the overview row whose name is `name` (empty if none).
  QString status_of(const QString& name) const;
  /// Shows the history of the overview row `row`.
  void show_history(int row);
  QTableWidget* history() const { return history_; }

 signals:
  void problem(const QString& message);

 private:
  enum class Kind { titrant, electrode, burette };
  void add_overview_row(Kind kind, const QString& name, const QString& current,
                        const QString& detail, const ExpiryStatus& status);

  store::SqliteStore* store_ = nullptr;
  std::function<method::TimePoint()> now_;
  QTableWidget* overview_ = nullptr;
  QLabel* history_title_ = nullptr;
  QTableWidget* history_ = nullptr;
  std::unique_ptr<ReviewChart> chart_;
  MessageLine* message_ = nullptr;
};

}  // namespace veq::ui::review
