// Results and history: the runs and series of a store with filters; a run's
// curve with every stored evaluation overlaid (endpoints, and the diagnostics
// each method draws); re-evaluating with another endpoint method or options
// (detection runs on a worker thread; the new evaluation is added to the
// store, the raw points never change) and the evaluations side by side;
// choosing the evaluation the results use (reason and password); a
// reviewer's sign-off (password again); export to CSV or JSON; the PDF
// report; replicate statistics of a series; a control chart of titers and
// check standards; the audit trail and its check.
#pragma once

#include <cstdint>
#include <memory>
#include <optional>
#include <string>
#include <vector>

#include <QtWidgets/QWidget>

#include "common/result.hpp"
#include "controller/audit/audit.hpp"
#include "controller/store/sqlite_store.hpp"
#include "detection/endpoint.hpp"
#include "ui/review/review_logic.hpp"
#include "ui/review/review_support.hpp"

class QComboBox;
class QDateEdit;
class QLabel;
class QLineEdit;
class QTabWidget;
class QTableWidget;
class QThread;

namespace veq::ui::review {

class ReviewChart;

class ResultsView : public QWidget {
  Q_OBJECT

 public:
  explicit ResultsView(QWidget* parent = nullptr);
  ~ResultsView() override;

  /// Shows the store's runs and series (not owned; nullptr detaches).
  Result<void> set_store(store::SqliteStore* store);
  /// Reads runs, series, control histories and the audit trail again.
  Result<void> reload();

  // ---- runs and filters
  void set_filter(const RunFilter& filter);
  RunFilter filter() const;
  std::vector<std::int64_t> listed_runs() const;
  /// Shows a run (selecting it in the list when it is listed).
  Result<void> show_run(std::int64_t run_id);
  std::optional<std::int64_t> current_run() const { return run_id_; }

  // ---- evaluations
  /// Starts evaluating the current run's curve with `method` and `options`
  /// (JSON object text) on a worker thread; the result is added to the store
  /// and shown when it is done (signal reevaluation_finished).
  Result<void> start_reevaluation(const std::string& method, const std::string& options_json);
  bool busy() const { return !workers_.empty(); }
  /// The side-by-side table: row names and one column per evaluation.
  QTableWidget* comparison_table() const { return comparison_; }
  /// The cell of the row named `row` in the column of evaluation
  /// `evaluation_id` (empty if none).
  QString comparison_cell(const QString& row, std::int64_t evaluation_id) const;
  /// Names of everything drawn on the curve chart (for tests).
  QStringList chart_names() const;

  /// Makes `evaluation_id` the one the current run's results use: asks for
  /// the user's name, password and the reason (refused without a reason).
  Result<void> choose_evaluation(std::int64_t evaluation_id);
  /// A reviewer's signature on the current run, password entered again.
  Result<void> sign_off(const std::string& meaning);
  void set_credentials_provider(CredentialsProvider provider) {
    credentials_ = std::move(provider);
  }

  // ---- output
  /// Exports the listed runs: format "csv" (with `table` one of runs,
  /// points, evaluations, results) or "json".
  Result<void> export_listed(const std::string& path, const std::string& format,
                             const std::string& table = "results");
  /// The current run's PDF report.
  Result<void> write_run_pdf(const std::string& path);
  /// The current series' PDF report.
  Result<void> write_series_pdf(const std::string& path);

  // ---- series, control chart, audit
  Result<void> show_series(std::int64_t series_id);
  std::optional<std::int64_t> current_series() const { return series_id_; }
  QTableWidget* statistics_table() const { return statistics_; }
  /// Number of control histories (titers, check standards) and showing one.
  int control_history_count() const { return static_cast<int>(histories_.size()); }
  const std::vector<ControlHistory>& histories() const { return histories_; }
  Result<void> show_control_history(int index);
  Result<controller::audit::Verification> verify_audit();
  QTableWidget* audit_table() const { return audit_; }

  /// Switches the right-hand tabs: 0 curve, 1 series, 2 control chart, 3 audit.
  void show_page(int index);
  /// The message line's text (errors start with "Problem").
  QString message() const;

 signals:
  void problem(const QString& message);
  /// A re-evaluation ended: ok, and the new evaluation's id (0 if it failed).
  void reevaluation_finished(bool ok, qint64 evaluation_id);

 private:
  void build_filters(QWidget* parent);
  void fill_runs();
  void fill_series();
  Result<void> draw_run();
  void draw_chart();
  void fill_comparison();
  void fill_run_summary();
  void fill_audit();
  void recompute_diagnostics();
  void launch(QThread* thread);
  void fail(const Error& error);

  store::SqliteStore* store_ = nullptr;
  CredentialsProvider credentials_;
  std::vector<store::RunRecord> runs_;
  std::optional<std::int64_t> run_id_;
  std::optional<std::int64_t> series_id_;
  store::RunRecord run_;
  std::vector<store::EvaluationRecord> evaluations_;
  std::vector<store::PointRecord> points_;
  std::optional<std::int64_t> chosen_evaluation_;
  /// Recomputed evaluations (for their diagnostics) by evaluation id.
  std::vector<std::pair<std::int64_t, detection::Evaluation>> diagnostics_;
  std::uint64_t generation_ = 0;  ///< drops worker results for a run no longer shown
  std::vector<QThread*> workers_;
  std::vector<ControlHistory> histories_;

  QDateEdit* from_day_ = nullptr;
  QDateEdit* to_day_ = nullptr;
  QComboBox* method_filter_ = nullptr;
  QComboBox* status_filter_ = nullptr;
  QLineEdit* text_filter_ = nullptr;
  QTableWidget* runs_table_ = nullptr;
  QTableWidget* series_table_ = nullptr;
  QTabWidget* pages_ = nullptr;
  std::unique_ptr<ReviewChart> curve_chart_;
  QComboBox* overlay_unit_ = nullptr;
  QLabel* run_summary_ = nullptr;
  QTableWidget* comparison_ = nullptr;
  QComboBox* endpoint_method_ = nullptr;
  QLineEdit* endpoint_options_ = nullptr;
  QComboBox* choose_combo_ = nullptr;
  QComboBox* meaning_ = nullptr;
  QComboBox* export_table_ = nullptr;
  QLabel* series_summary_ = nullptr;
  QTableWidget* statistics_ = nullptr;
  QComboBox* history_combo_ = nullptr;
  std::unique_ptr<ReviewChart> control_chart_;
  QTableWidget* control_points_ = nullptr;
  QLabel* control_caption_ = nullptr;
  QTableWidget* audit_ = nullptr;
  QLabel* audit_verdict_ = nullptr;
  MessageLine* message_ = nullptr;
};

}  // namespace veq::ui::review
