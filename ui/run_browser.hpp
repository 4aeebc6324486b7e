// The run view: the runs of a store in a list, and the selected run's curve
// and first derivative with its endpoints marked. Reads through the
// store::RunStore interface only.
#pragma once

#include <cstdint>
#include <memory>
#include <optional>

#include <QtWidgets/QWidget>

#include "common/result.hpp"
#include "controller/store/run_store.hpp"

class QLabel;
class QListWidget;

namespace veq::ui {

class CurveChart;

/// The safety line every window shows (complexometric work uses hazardous
/// reagents; veq does not replace the lab's own rules).
extern const char* const kCautionText;

class RunBrowser : public QWidget {
  Q_OBJECT

 public:
  explicit RunBrowser(QWidget* parent = nullptr);
  ~RunBrowser() override;

  /// Lists the runs of a store (not owned: it must outlive this view or be
  /// replaced first). nullptr empties the view.
  Result<void> set_store(store::RunStore* store);
  /// Reads the list of runs again (new runs appear), keeping the selection.
  Result<void> reload();
  /// Selects a run in the list and draws it. not_found if it is not there.
  Result<void> show_run(std::int64_t run_id);
  /// The run on display, if any.
  std::optional<std::int64_t> current_run() const { return current_; }
  /// Number of runs in the list.
  int run_count() const;

 signals:
  /// A run could not be drawn (the message says why).
  void problem(const QString& message);

 private:
  void draw(std::int64_t run_id);

  store::RunStore* store_ = nullptr;
  std::optional<std::int64_t> current_;
  QListWidget* runs_ = nullptr;
  QLabel* title_ = nullptr;
  QLabel* summary_ = nullptr;
  QLabel* note_ = nullptr;
  std::unique_ptr<CurveChart> curve_chart_;
  std::unique_ptr<CurveChart> derivative_chart_;
};

}  // namespace veq::ui
