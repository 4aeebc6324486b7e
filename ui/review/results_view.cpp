#include "ui/review/results_view.hpp"

#include <algorithm>
#include <map>
#include <set>

#include <QtCore/QDateTime>
#include <QtCore/QThread>
#include <QtWidgets/QComboBox>
#include <QtWidgets/QDateEdit>
#include <QtWidgets/QFileDialog>
#include <QtWidgets/QFormLayout>
#include <QtWidgets/QGridLayout>
#include <QtWidgets/QGroupBox>
#include <QtWidgets/QHBoxLayout>
#include <QtWidgets/QHeaderView>
#include <QtWidgets/QLabel>
#include <QtWidgets/QLineEdit>
#include <QtWidgets/QPushButton>
#include <QtWidgets/QSplitter>
#include <QtWidgets/QTabWidget>
#include <QtWidgets/QTableWidget>
#include <QtWidgets/QVBoxLayout>

#include "controller/cli/run_export.hpp"
#include "controller/evaluation_results.hpp"
#include "controller/method/utc_time.hpp"
#include "controller/titration.hpp"
#include "detection/evaluate.hpp"
#include "ui/report/pdf_report.hpp"
#include "ui/report/report_from_store.hpp"
#include "ui/review/review_chart.hpp"

namespace veq::ui::review {

namespace {

void set_cell(QTableWidget* table, int row, int column, const QString& text) {
  table->setItem(row, column, new QTableWidgetItem(text));
}

/// A day of the filter ("" for the "any" value at the edit's minimum).
std::string day_of(const QDateEdit* edit) {
  if (edit->date() == edit->minimumDate())
    return {};
  return edit->date().toString(Qt::ISODate).toStdString();
}

void set_day(QDateEdit* edit, const std::string& day) {
  if (day.empty()) {
    edit->setDate(edit->minimumDate());
    return;
  }
  edit->setDate(QDate::fromString(q(day), Qt::ISODate));
}

}  // namespace

ResultsView::ResultsView(QWidget* parent)
    : QWidget(parent), credentials_(dialog_credentials(this)) {
  auto* outer = new QVBoxLayout(this);
  auto* splitter = new QSplitter(Qt::Horizontal, this);
  outer->addWidget(splitter, 1);

  // ---- left: runs with filters, and series
  auto* left = new QTabWidget(splitter);
  auto* runs_page = new QWidget(left);
  auto* runs_layout = new QVBoxLayout(runs_page);
  build_filters(runs_page);
  auto* filters = new QFormLayout();
  auto* days = new QHBoxLayout();
  days->addWidget(from_day_);
  days->addWidget(new QLabel("to", runs_page));
  days->addWidget(to_day_);
  auto* days_label = new QLabel("&Started from:", runs_page);
  days_label->setBuddy(from_day_);
  filters->addRow(days_label, days);
  filters->addRow("&Method:", method_filter_);
  filters->addRow("S&tatus:", status_filter_);
  filters->addRow("Te&xt:", text_filter_);
  runs_layout->addLayout(filters);
  runs_table_ = make_table(
      runs_page, {"run", "started (UTC)", "sample", "method", "status", "points"}, "runs_table");
  runs_layout->addWidget(runs_table_, 1);
  left->addTab(runs_page, "&Runs");
  auto* series_page = new QWidget(left);
  auto* series_layout = new QVBoxLayout(series_page);
  series_table_ =
      make_table(series_page, {"series", "name", "started (UTC)", "status"}, "series_table");
  series_layout->addWidget(series_table_);
  left->addTab(series_page, "S&eries");

  connect(runs_table_, &QTableWidget::itemSelectionChanged, this, [this] {
    const int row = runs_table_->currentRow();
    if (row < 0 || runs_table_->item(row, 0) == nullptr)
      return;
    const std::int64_t id = runs_table_->item(row, 0)->data(Qt::UserRole).toLongLong();
    if (run_id_ && *run_id_ == id)
      return;
    if (auto r = show_run(id); !r)
      fail(r.error());
  });
  connect(series_table_, &QTableWidget::itemSelectionChanged, this, [this] {
    const int row = series_table_->currentRow();
    if (row < 0 || series_table_->item(row, 0) == nullptr)
      return;
    if (auto r = show_series(series_table_->item(row, 0)->data(Qt::UserRole).toLongLong()); !r)
      fail(r.error());
    show_page(1);
  });

  // ---- right: pages
  pages_ = new QTabWidget(splitter);

  // Curve and evaluations.
  auto* curve_page = new QWidget(pages_);
  auto* curve_layout = new QVBoxLayout(curve_page);
  run_summary_ = new QLabel(curve_page);
  run_summary_->setObjectName("run_summary");
  run_summary_->setWordWrap(true);
  run_summary_->setTextInteractionFlags(Qt::TextSelectableByMouse);
  curve_layout->addWidget(run_summary_);
  curve_chart_ = std::make_unique<ReviewChart>(curve_page);
  curve_chart_->widget()->setMinimumHeight(240);
  curve_layout->addWidget(curve_chart_->widget(), 3);
  auto* overlay_row = new QHBoxLayout();
  overlay_unit_ = new QComboBox(curve_page);
  auto* overlay_label = new QLabel("&Diagnostics overlaid (right axis):", curve_page);
  overlay_label->setBuddy(overlay_unit_);
  overlay_row->addWidget(overlay_label);
  overlay_row->addWidget(overlay_unit_, 1);
  curve_layout->addLayout(overlay_row);
  connect(overlay_unit_, &QComboBox::currentIndexChanged, this, [this] { draw_chart(); });
  comparison_ = new QTableWidget(curve_page);
  comparison_->setObjectName("comparison_table");
  comparison_->setEditTriggers(QAbstractItemView::NoEditTriggers);
  comparison_->horizontalHeader()->setSectionResizeMode(QHeaderView::Stretch);
  comparison_->verticalHeader()->setDefaultSectionSize(22);
  curve_layout->addWidget(comparison_, 2);

  auto* actions = new QGridLayout();
  endpoint_method_ = new QComboBox(curve_page);
  for (auto name : detection::method_names())
    endpoint_method_->addItem(QString::fromUtf8(name.data(), static_cast<int>(name.size())));
  endpoint_options_ = new QLineEdit("{}", curve_page);
  endpoint_options_->setToolTip(
      "Options of the endpoint method as a JSON object, e.g. {\"smoothing_points\": 7}; "
      "docs/detection.md lists them");
  auto* reevaluate = new QPushButton("Re-e&valuate", curve_page);
  auto* method_label = new QLabel("Endpoint &method:", curve_page);
  method_label->setBuddy(endpoint_method_);
  auto* options_label = new QLabel("O&ptions (JSON):", curve_page);
  options_label->setBuddy(endpoint_options_);
  actions->addWidget(method_label, 0, 0);
  actions->addWidget(endpoint_method_, 0, 1);
  actions->addWidget(options_label, 0, 2);
  actions->addWidget(endpoint_options_, 0, 3);
  actions->addWidget(reevaluate, 0, 4);
  connect(reevaluate, &QPushButton::clicked, this, [this] {
    if (auto r = start_reevaluation(endpoint_method_->currentText().toStdString(),
                                    endpoint_options_->text().toStdString());
        !r)
      fail(r.error());
  });
  choose_combo_ = new QComboBox(curve_page);
  auto* choose = new QPushButton("&Use for results...", curve_page);
  auto* choose_label = new QLabel("E&valuation for the results:", curve_page);
  choose_label->setBuddy(choose_combo_);
  actions->addWidget(choose_label, 1, 0);
  actions->addWidget(choose_combo_, 1, 1, 1, 3);
  actions->addWidget(choose, 1, 4);
  connect(choose, &QPushButton::clicked, this, [this] {
    if (choose_combo_->currentIndex() < 0)
      return;
    if (auto r = choose_evaluation(choose_combo_->currentData().toLongLong()); !r)
      fail(r.error());
  });
  meaning_ = new QComboBox(curve_page);
  meaning_->setEditable(true);
  meaning_->addItems({"reviewed and approved", "reviewed, results not approved"});
  auto* sign = new QPushButton("Si&gn off...", curve_page);
  auto* meaning_label = new QLabel("Sign-off &meaning:", curve_page);
  meaning_label->setBuddy(meaning_);
  actions->addWidget(meaning_label, 2, 0);
  actions->addWidget(meaning_, 2, 1, 1, 3);
  actions->addWidget(sign, 2, 4);
  connect(sign, &QPushButton::clicked, this, [this] {
    if (auto r = sign_off(meaning_->currentText().toStdString()); !r)
      fail(r.error());
  });
  export_table_ = new QComboBox(curve_page);
  export_table_->addItems({"results", "runs", "evaluations", "points"});
  auto* export_csv = new QPushButton("Export &CSV...", curve_page);
  auto* export_json = new QPushButton("Export &JSON...", curve_page);
  auto* pdf = new QPushButton("P&DF report...", curve_page);
  auto* export_label = new QLabel("Listed runs, &table:", curve_page);
  export_label->setBuddy(export_table_);
  auto* output_row = new QHBoxLayout();
  output_row->addWidget(export_table_);
  output_row->addWidget(export_csv);
  output_row->addWidget(export_json);
  output_row->addWidget(pdf);
  actions->addWidget(export_label, 3, 0);
  actions->addLayout(output_row, 3, 1, 1, 4);
  curve_layout->addLayout(actions);
  connect(export_csv, &QPushButton::clicked, this, [this] {
    const QString path =
        QFileDialog::getSaveFileName(this, "Export CSV", "veq-export.csv", "CSV files (*.csv)");
    if (path.isEmpty())
      return;
    if (auto r =
            export_listed(path.toStdString(), "csv", export_table_->currentText().toStdString());
        !r)
      fail(r.error());
  });
  connect(export_json, &QPushButton::clicked, this, [this] {
    const QString path =
        QFileDialog::getSaveFileName(this, "Export JSON", "veq-export.json", "JSON files (*.json)");
    if (path.isEmpty())
      return;
    if (auto r = export_listed(path.toStdString(), "json"); !r)
      fail(r.error());
  });
  connect(pdf, &QPushButton::clicked, this, [this] {
    if (!run_id_)
      return;
    const QString path = QFileDialog::getSaveFileName(
        this, "PDF report", QStringLiteral("run-%1.pdf").arg(*run_id_), "PDF files (*.pdf)");
    if (path.isEmpty())
      return;
    if (auto r = write_run_pdf(path.toStdString()); !r)
      fail(r.error());
  });
  pages_->addTab(curve_page, "C&urve and evaluations");

  // Series statistics.
  auto* series_stats_page = new QWidget(pages_);
  auto* stats_layout = new QVBoxLayout(series_stats_page);
  series_summary_ = new QLabel("Choose a series on the left.", series_stats_page);
  series_summary_->setWordWrap(true);
  stats_layout->addWidget(series_summary_);
  statistics_ = make_table(series_stats_page,
                           {"entry", "kind", "status", "result", "mean", "unit", "n",
                            "standard deviation", "RSD (%)", "counted values", "flags"},
                           "statistics_table");
  statistics_->horizontalHeader()->setSectionResizeMode(QHeaderView::ResizeToContents);
  stats_layout->addWidget(statistics_, 1);
  auto* series_pdf = new QPushButton("Series PDF &report...", series_stats_page);
  stats_layout->addWidget(series_pdf);
  connect(series_pdf, &QPushButton::clicked, this, [this] {
    if (!series_id_)
      return;
    const QString path = QFileDialog::getSaveFileName(
        this, "Series PDF report", QStringLiteral("series-%1.pdf").arg(*series_id_),
        "PDF files (*.pdf)");
    if (path.isEmpty())
      return;
    if (auto r = write_series_pdf(path.toStdString()); !r)
      fail(r.error());
  });
  pages_->addTab(series_stats_page, "Series &statistics");

  // Control chart.
  auto* control_page = new QWidget(pages_);
  auto* control_layout = new QVBoxLayout(control_page);
  history_combo_ = new QComboBox(control_page);
  auto* history_row = new QHBoxLayout();
  auto* history_label = new QLabel("&Quantity:", control_page);
  history_label->setBuddy(history_combo_);
  history_row->addWidget(history_label);
  history_row->addWidget(history_combo_, 1);
  control_layout->addLayout(history_row);
  control_chart_ = std::make_unique<ReviewChart>(control_page);
  control_layout->addWidget(control_chart_->widget(), 2);
  control_caption_ = new QLabel(control_page);
  control_caption_->setWordWrap(true);
  control_layout->addWidget(control_caption_);
  control_points_ =
      make_table(control_page, {"when (UTC)", "value", "unit", "against the limits", "from"},
                 "control_points");
  control_layout->addWidget(control_points_, 1);
  connect(history_combo_, &QComboBox::currentIndexChanged, this, [this](int index) {
    if (index >= 0)
      (void)show_control_history(index);
  });
  pages_->addTab(control_page, "C&ontrol chart");

  // Audit trail.
  auto* audit_page = new QWidget(pages_);
  auto* audit_layout = new QVBoxLayout(audit_page);
  audit_ = make_table(
      audit_page,
      {"#", "when (UTC)", "user", "action", "subject", "old value", "new value", "reason"},
      "audit_table");
  audit_layout->addWidget(audit_, 1);
  auto* verify_row = new QHBoxLayout();
  auto* verify = new QPushButton("&Verify the trail", audit_page);
  audit_verdict_ = new QLabel(audit_page);
  audit_verdict_->setWordWrap(true);
  verify_row->addWidget(verify);
  verify_row->addWidget(audit_verdict_, 1);
  audit_layout->addLayout(verify_row);
  connect(verify, &QPushButton::clicked, this, [this] { (void)verify_audit(); });
  pages_->addTab(audit_page, "&Audit trail");

  splitter->setStretchFactor(0, 2);
  splitter->setStretchFactor(1, 5);
  splitter->setSizes({330, 850});
  message_ = new MessageLine(this);
  outer->addWidget(message_);
  connect(message_, &MessageLine::problem, this, &ResultsView::problem);
  curve_chart_->clear("choose a run");
  control_chart_->clear("no titers or check standards yet");
}

ResultsView::~ResultsView() {
  // Workers hold only copies of curves; wait for them so none outlives the view.
  for (QThread* t : workers_) {
    t->wait();
    delete t;
  }
}

void ResultsView::build_filters(QWidget* parent) {
  auto make_day = [parent] {
    auto* edit = new QDateEdit(parent);
    edit->setCalendarPopup(true);
    edit->setDisplayFormat("yyyy-MM-dd");
    edit->setMinimumDate(QDate(2000, 1, 1));
    edit->setSpecialValueText("any day");  // shown at the minimum: no limit
    edit->setDate(edit->minimumDate());
    return edit;
  };
  from_day_ = make_day();
  to_day_ = make_day();
  method_filter_ = new QComboBox(parent);
  status_filter_ = new QComboBox(parent);
  status_filter_->addItem("any status", 0);
  for (int s = 1; s <= 6; ++s)
    status_filter_->addItem(store::run_status_name(static_cast<store::RunStatus>(s)), s);
  text_filter_ = new QLineEdit(parent);
  text_filter_->setPlaceholderText("sample, series, titrant, reason...");
  text_filter_->setClearButtonEnabled(true);
  connect(from_day_, &QDateEdit::dateChanged, this, [this] { fill_runs(); });
  connect(to_day_, &QDateEdit::dateChanged, this, [this] { fill_runs(); });
  connect(method_filter_, &QComboBox::currentIndexChanged, this, [this] { fill_runs(); });
  connect(status_filter_, &QComboBox::currentIndexChanged, this, [this] { fill_runs(); });
  connect(text_filter_, &QLineEdit::textChanged, this, [this] { fill_runs(); });
}

void ResultsView::fail(const Error& error) {
  message_->show_error(error);
}

QString ResultsView::message() const {
  return message_->text();
}

void ResultsView::show_page(int index) {
  pages_->setCurrentIndex(index);
}

Result<void> ResultsView::set_store(store::SqliteStore* store) {
  ++generation_;
  store_ = store;
  run_id_.reset();
  series_id_.reset();
  evaluations_.clear();
  points_.clear();
  diagnostics_.clear();
  return reload();
}

Result<void> ResultsView::reload() {
  runs_.clear();
  histories_.clear();
  if (store_ != nullptr) {
    auto runs = store_->list_runs();
    if (!runs) {
      fail(runs.error());
      return runs.error();
    }
    runs_ = std::move(runs).value();
    auto histories = control_histories(*store_, *store_);
    if (!histories) {
      fail(histories.error());
      return histories.error();
    }
    histories_ = std::move(histories).value();
  }
  // Method filter: every method name of the runs.
  {
    const QString keep = method_filter_->currentText();
    QSignalBlocker block(method_filter_);
    method_filter_->clear();
    method_filter_->addItem("any method");
    std::set<std::string> names;
    for (const auto& r : runs_)
      names.insert(r.run.method_name);
    for (const auto& n : names)
      method_filter_->addItem(q(n));
    const int index = method_filter_->findText(keep);
    method_filter_->setCurrentIndex(index >= 0 ? index : 0);
  }
  fill_runs();
  fill_series();
  {
    QSignalBlocker block(history_combo_);
    history_combo_->clear();
    for (const auto& h : histories_)
      history_combo_->addItem(
          QStringLiteral("%1 (%2 points)").arg(q(h.title)).arg(h.points.size()));
  }
  if (!histories_.empty())
    (void)show_control_history(0);
  else
    control_chart_->clear("no titers or check standards yet");
  fill_audit();
  if (run_id_)
    return draw_run();
  curve_chart_->clear(store_ ? "choose a run" : "no store open");
  return {};
}

void ResultsView::set_filter(const RunFilter& filter) {
  QSignalBlocker a(from_day_), b(to_day_), c(method_filter_), d(status_filter_), e(text_filter_);
  set_day(from_day_, filter.from_day);
  set_day(to_day_, filter.to_day);
  const int m = filter.method.empty() ? 0 : method_filter_->findText(q(filter.method));
  method_filter_->setCurrentIndex(std::max(0, m));
  status_filter_->setCurrentIndex(
      std::max(0, status_filter_->findData(filter.status ? static_cast<int>(*filter.status) : 0)));
  text_filter_->setText(q(filter.text));
  fill_runs();
}

RunFilter ResultsView::filter() const {
  RunFilter f;
  f.from_day = day_of(from_day_);
  f.to_day = day_of(to_day_);
  if (method_filter_->currentIndex() > 0)
    f.method = method_filter_->currentText().toStdString();
  if (const int s = status_filter_->currentData().toInt(); s > 0)
    f.status = static_cast<store::RunStatus>(s);
  f.text = text_filter_->text().toStdString();
  return f;
}

std::vector<std::int64_t> ResultsView::listed_runs() const {
  std::vector<std::int64_t> ids;
  for (int row = 0; row < runs_table_->rowCount(); ++row)
    ids.push_back(runs_table_->item(row, 0)->data(Qt::UserRole).toLongLong());
  return ids;
}

void ResultsView::fill_runs() {
  const RunFilter f = filter();
  QSignalBlocker block(runs_table_);
  runs_table_->setRowCount(0);
  int row = 0;
  for (auto it = runs_.rbegin(); it != runs_.rend(); ++it) {  // newest first
    const auto& r = *it;
    if (!run_matches(r, f))
      continue;
    runs_table_->insertRow(row);
    auto* id = new QTableWidgetItem(QString::number(r.id));
    id->setData(Qt::UserRole, static_cast<qlonglong>(r.id));
    runs_table_->setItem(row, 0, id);
    set_cell(runs_table_, row, 1, q(readable_utc(r.started_utc)));
    set_cell(runs_table_, row, 2, q(r.run.sample_id));
    set_cell(runs_table_, row, 3, q(r.run.method_name));
    set_cell(runs_table_, row, 4, store::run_status_name(r.status));
    set_cell(runs_table_, row, 5, QString::number(r.point_count));
    if (run_id_ && r.id == *run_id_)
      runs_table_->selectRow(row);
    ++row;
  }
  runs_table_->resizeColumnsToContents();
}

void ResultsView::fill_series() {
  QSignalBlocker block(series_table_);
  series_table_->setRowCount(0);
  if (store_ == nullptr)
    return;
  auto list = store_->list_series();
  if (!list) {
    fail(list.error());
    return;
  }
  int row = 0;
  for (auto it = list->rbegin(); it != list->rend(); ++it, ++row) {
    series_table_->insertRow(row);
    auto* id = new QTableWidgetItem(QString::number(it->id));
    id->setData(Qt::UserRole, static_cast<qlonglong>(it->id));
    series_table_->setItem(row, 0, id);
    set_cell(series_table_, row, 1, q(it->name));
    set_cell(series_table_, row, 2, q(readable_utc(it->started_utc)));
    set_cell(series_table_, row, 3, store::series_status_name(it->status));
  }
  series_table_->resizeColumnsToContents();
}

// ---------------------------------------------------------------------------
// A run

Result<void> ResultsView::show_run(std::int64_t run_id) {
  if (store_ == nullptr)
    return make_error(ErrorKind::invalid_input, "no store is open");
  auto run = store_->load_run(run_id);
  if (!run)
    return run.error();
  run_id_ = run_id;
  run_ = std::move(run).value();
  diagnostics_.clear();
  ++generation_;
  for (int row = 0; row < runs_table_->rowCount(); ++row) {
    if (runs_table_->item(row, 0)->data(Qt::UserRole).toLongLong() == run_id) {
      QSignalBlocker block(runs_table_);
      runs_table_->selectRow(row);
    }
  }
  auto drawn = draw_run();
  if (drawn)
    message_->show_info(
        QStringLiteral("Run %1: %2 evaluation(s).").arg(run_id).arg(evaluations_.size()));
  return drawn;
}

Result<void> ResultsView::draw_run() {
  auto points = store_->load_points(*run_id_);
  if (!points)
    return points.error();
  points_ = std::move(points).value();
  auto evaluations = store_->load_evaluations(*run_id_);
  if (!evaluations)
    return evaluations.error();
  evaluations_ = std::move(evaluations).value();
  chosen_evaluation_.reset();
  if (store_has_users(*store_)) {
    if (auto trail = open_audit_trail(*store_); trail) {
      if (auto choice = (*trail)->evaluation_choice(*run_id_); choice && *choice)
        chosen_evaluation_ = (*choice)->evaluation_id;
    }
  }
  {
    QSignalBlocker block(choose_combo_);
    choose_combo_->clear();
    for (const auto& e : evaluations_)
      choose_combo_->addItem(QStringLiteral("evaluation %1 (%2)").arg(e.id).arg(q(e.method)),
                             static_cast<qlonglong>(e.id));
    if (!evaluations_.empty())
      choose_combo_->setCurrentIndex(static_cast<int>(evaluations_.size()) - 1);
  }
  fill_run_summary();
  fill_comparison();
  draw_chart();
  recompute_diagnostics();
  return {};
}

void ResultsView::fill_run_summary() {
  const auto& r = run_;
  QStringList lines;
  lines << QStringLiteral("<b>Run %1: %2</b> &mdash; %3, %4 points")
               .arg(r.id)
               .arg(q(r.run.sample_id).toHtmlEscaped(), store::run_status_name(r.status))
               .arg(r.point_count);
  lines << QStringLiteral("Method '%1'; titrant %2 at %3 mol/L; sample %4 mL; started %5%6")
               .arg(q(r.run.method_name).toHtmlEscaped(), q(r.run.titrant_name).toHtmlEscaped(),
                    significant(r.run.titrant_conc_mol_per_l, 5), fixed(r.run.sample_volume_ml, 3),
                    q(readable_utc(r.started_utc)),
                    r.end_reason.empty() ? QString()
                                         : "; ended: " + q(r.end_reason).toHtmlEscaped());
  if (auto results = store_->load_results(r.id); results && !results->empty()) {
    QStringList parts;
    for (const auto& res : *results)
      parts << QStringLiteral("%1 = %2 %3 (evaluation %4)")
                   .arg(q(res.name), significant(res.value, 5), q(res.unit))
                   .arg(res.evaluation_id);
    lines << "Results: " + parts.join("; ");
  } else {
    lines << "Results: none stored.";
  }
  lines << (chosen_evaluation_
                ? QStringLiteral("Evaluation chosen for the results: %1.").arg(*chosen_evaluation_)
                : QStringLiteral("No evaluation chosen by hand: the results use the one they "
                                 "name."));
  if (store_has_users(*store_)) {
    if (auto trail = open_audit_trail(*store_); trail) {
      if (auto signs = (*trail)->sign_offs(r.id); signs) {
        if (signs->empty())
          lines << "Not signed off.";
        for (const auto& s : *signs)
          lines << QStringLiteral("Signed off by %1 (%2) at %3.")
                       .arg(q(s.reviewer), q(s.meaning), q(readable_utc(s.signed_utc)));
      }
    }
  } else {
    lines << "Not signed off (the store has no users yet).";
  }
  run_summary_->setText(lines.join("<br>"));
}

void ResultsView::fill_comparison() {
  const QString unit = q(signal_unit_text(run_.run.signal_kind));
  std::size_t most = 0;
  for (const auto& e : evaluations_)
    most = std::max(most, e.endpoints.size());
  // The endpoints first: they are what the columns are compared for.
  QStringList rows = {"method"};
  for (std::size_t k = 1; k <= most; ++k) {
    const QString n = QString::number(k);
    rows << "endpoint " + n + " volume (mL)"
         << "endpoint " + n + " minus first evaluation (mL)"
         << "endpoint " + n + " standard uncertainty (mL)"
         << "endpoint " + n + " signal (" + unit + ")"
         << "endpoint " + n + " steepness (" + unit + "/mL)"
         << "endpoint " + n + " flags";
  }
  const int tail = static_cast<int>(rows.size());
  rows << "used for results"
       << "curve flags"
       << "options"
       << "stored (UTC)";
  comparison_->clear();
  comparison_->setRowCount(static_cast<int>(rows.size()));
  comparison_->setColumnCount(static_cast<int>(evaluations_.size()));
  comparison_->setVerticalHeaderLabels(rows);
  // The results name the evaluation they were computed from.
  std::set<std::int64_t> used;
  if (auto results = store_->load_results(run_.id); results)
    for (const auto& r : *results)
      used.insert(r.evaluation_id);
  for (std::size_t c = 0; c < evaluations_.size(); ++c) {
    const auto& e = evaluations_[c];
    const int col = static_cast<int>(c);
    auto* header = new QTableWidgetItem(QStringLiteral("evaluation %1").arg(e.id));
    header->setData(Qt::UserRole, static_cast<qlonglong>(e.id));
    header->setForeground(QColor(QRgb(chart_colour(c))));
    comparison_->setHorizontalHeaderItem(col, header);
    set_cell(comparison_, 0, col, q(e.method));
    for (std::size_t k = 0; k < e.endpoints.size(); ++k) {
      const auto& p = e.endpoints[k];
      const int base = 1 + static_cast<int>(k) * 6;
      const auto& first = evaluations_.front().endpoints;
      set_cell(comparison_, base, col, fixed(p.volume_ml, 4));
      set_cell(comparison_, base + 1, col,
               k < first.size() ? QString::asprintf("%+.4f", p.volume_ml - first[k].volume_ml)
                                : QString("-"));
      set_cell(comparison_, base + 2, col, fixed(p.uncertainty_ml, 4));
      set_cell(comparison_, base + 3, col, significant(p.signal, 5));
      set_cell(comparison_, base + 4, col, significant(p.steepness, 4));
      set_cell(comparison_, base + 5, col, p.flags.empty() ? "none" : q(p.flags));
    }
    const bool chosen = chosen_evaluation_ ? *chosen_evaluation_ == e.id : used.count(e.id) > 0;
    set_cell(comparison_, tail, col, chosen ? (chosen_evaluation_ ? "yes (chosen)" : "yes") : "no");
    set_cell(comparison_, tail + 1, col, e.flags.empty() ? "none" : q(e.flags));
    set_cell(comparison_, tail + 2, col,
             q(e.options_json.size() > 80 ? e.options_json.substr(0, 77) + "..." : e.options_json));
    comparison_->item(tail + 2, col)->setToolTip(q(e.options_json));
    set_cell(comparison_, tail + 3, col, q(readable_utc(e.created_utc)));
  }
}

QString ResultsView::comparison_cell(const QString& row, std::int64_t evaluation_id) const {
  int r = -1;
  for (int i = 0; i < comparison_->rowCount(); ++i)
    if (comparison_->verticalHeaderItem(i) && comparison_->verticalHeaderItem(i)->text() == row)
      r = i;
  for (int c = 0; c < comparison_->columnCount(); ++c) {
    auto* header = comparison_->horizontalHeaderItem(c);
    if (r >= 0 && header && header->data(Qt::UserRole).toLongLong() == evaluation_id)
      return comparison_->item(r, c) ? comparison_->item(r, c)->text() : QString();
  }
  return {};
}

QStringList ResultsView::chart_names() const {
  return curve_chart_->drawn_names();
}

void ResultsView::draw_chart() {
  if (!run_id_)
    return;
  if (points_.empty()) {
    curve_chart_->clear(QStringLiteral("run %1 has no points").arg(*run_id_));
    return;
  }
  const QString unit = q(signal_unit_text(run_.run.signal_kind));
  ChartContent content;
  content.title = QStringLiteral("Run %1: %2").arg(*run_id_).arg(q(run_.run.sample_id));
  content.x_title = "titrant added (mL)";
  content.y_title = "signal (" + unit + ")";
  ChartLine curve;
  curve.label = "measured (" + unit + ")";
  curve.rgb = 0x1565C0;
  for (const auto& p : points_) {
    curve.x.push_back(p.volume_ml);
    curve.y.push_back(p.signal);
  }
  content.lines.push_back(std::move(curve));
  for (std::size_t c = 0; c < evaluations_.size(); ++c) {
    const auto& e = evaluations_[c];
    for (std::size_t k = 0; k < e.endpoints.size(); ++k)
      content.verticals.push_back(
          ChartRule{QStringLiteral("evaluation %1 %2: %3 mL")
                        .arg(e.id)
                        .arg(q(e.method), fixed(e.endpoints[k].volume_ml, 3)),
                    e.endpoints[k].volume_ml, chart_colour(c),
                    c % 2 == 0 ? ChartLine::Style::dashed : ChartLine::Style::dotted});
  }
  // Diagnostics of one unit on the right axis (units cannot share an axis).
  const QString overlay = overlay_unit_->currentData().toString();
  if (!overlay.isEmpty()) {
    content.right_title = overlay;
    for (const auto& [id, evaluation] : diagnostics_) {
      std::size_t colour = 0;
      for (std::size_t c = 0; c < evaluations_.size(); ++c)
        if (evaluations_[c].id == id)
          colour = c;
      for (const auto& s : evaluation.diagnostics.series) {
        if (q(s.y_unit) != overlay)
          continue;
        ChartLine line;
        line.label = QStringLiteral("evaluation %1 %2 (%3)").arg(id).arg(q(s.name), q(s.y_unit));
        line.x = s.x_ml;
        line.y = s.y;
        line.rgb = chart_colour(colour);
        line.style = ChartLine::Style::dotted;
        line.right_axis = true;
        // The colour says which evaluation; the legend keeps one entry per evaluation.
        line.in_legend = false;
        content.lines.push_back(std::move(line));
      }
    }
  }
  curve_chart_->show(content);
}

void ResultsView::launch(QThread* thread) {
  workers_.push_back(thread);
  connect(thread, &QThread::finished, this, [this, thread] {
    workers_.erase(std::remove(workers_.begin(), workers_.end(), thread), workers_.end());
    thread->deleteLater();
  });
  thread->start();
}

void ResultsView::recompute_diagnostics() {
  if (!run_id_ || evaluations_.empty())
    return;
  auto curve = stored_curve(*store_, *run_id_);
  if (!curve)
    return;  // the summary shows the run; no diagnostics to draw
  struct Job {
    std::int64_t id;
    std::string method;
    nlohmann::json options;
  };
  std::vector<Job> jobs;
  for (const auto& e : evaluations_) {
    auto options = nlohmann::json::parse(e.options_json, nullptr, false);
    if (options.is_discarded())
      options = nlohmann::json::object();
    jobs.push_back(Job{e.id, e.method, options});
  }
  auto results = std::make_shared<std::vector<std::pair<std::int64_t, detection::Evaluation>>>();
  const std::uint64_t generation = generation_;
  // The stored options spell out every field, so the same method on the same
  // points gives the same diagnostics the evaluation was made with.
  QThread* thread = QThread::create([curve = std::move(curve).value(), jobs, results] {
    for (const auto& job : jobs) {
      try {
        if (auto e = detection::evaluate(curve, job.method, job.options); e)
          results->emplace_back(job.id, std::move(e).value());
      } catch (const std::exception&) {
        // No diagnostics for this evaluation; its stored endpoints are still drawn.
      }
    }
  });
  connect(thread, &QThread::finished, this, [this, results, generation] {
    if (generation != generation_)
      return;
    diagnostics_ = std::move(*results);
    std::map<QString, int> units;
    for (const auto& [id, e] : diagnostics_)
      for (const auto& s : e.diagnostics.series)
        ++units[q(s.y_unit)];
    const QString keep = overlay_unit_->currentData().toString();
    QSignalBlocker block(overlay_unit_);
    overlay_unit_->clear();
    overlay_unit_->addItem("none", QString());
    for (const auto& [unit, count] : units)
      overlay_unit_->addItem(QStringLiteral("%1 (%2 line(s))").arg(unit).arg(count), unit);
    int index = overlay_unit_->findData(keep);
    if (index <= 0 && overlay_unit_->count() > 1)
      index = 1;
    overlay_unit_->setCurrentIndex(std::max(0, index));
    draw_chart();
  });
  launch(thread);
}

Result<void> ResultsView::start_reevaluation(const std::string& method,
                                             const std::string& options_json) {
  if (store_ == nullptr || !run_id_)
    return make_error(ErrorKind::invalid_input, "choose a run to re-evaluate first");
  auto options = nlohmann::json::parse(options_json.empty() ? "{}" : options_json, nullptr, false);
  if (options.is_discarded() || !options.is_object())
    return make_error(ErrorKind::invalid_input,
                      "the options must be a JSON object such as {} or {\"smoothing_points\": 7}; "
                      "got '" +
                          options_json + "'");
  auto curve = stored_curve(*store_, *run_id_);
  if (!curve)
    return curve.error();
  const std::int64_t run_id = *run_id_;
  const std::uint64_t generation = generation_;
  auto outcome = std::make_shared<std::optional<Result<detection::Evaluation>>>();
  QThread* thread = QThread::create([curve = std::move(curve).value(), method, options, outcome] {
    // Nothing may escape a worker thread: an exception becomes the error shown.
    try {
      *outcome = detection::evaluate(curve, method, options);
    } catch (const std::exception& e) {
      *outcome = Result<detection::Evaluation>(make_error(
          ErrorKind::invalid_input, "the endpoint method stopped: " + std::string(e.what())));
    }
  });
  connect(thread, &QThread::finished, this, [this, outcome, run_id, generation] {
    if (!outcome->has_value()) {
      fail(make_error(ErrorKind::aborted, "the evaluation ended without a result"));
      emit reevaluation_finished(false, 0);
      return;
    }
    auto& result = **outcome;
    if (!result) {
      fail(result.error());
      emit reevaluation_finished(false, 0);
      return;
    }
    // Added whatever is on display now: the evaluation belongs to its run.
    auto id = store_ ? store_->add_evaluation(run_id, controller::evaluation_record(*result))
                     : Result<std::int64_t>(make_error(ErrorKind::invalid_input,
                                                       "the store was closed during evaluation"));
    if (!id) {
      fail(id.error());
      emit reevaluation_finished(false, 0);
      return;
    }
    if (generation == generation_ && run_id_ && *run_id_ == run_id) {
      (void)draw_run();
      message_->show_info(QStringLiteral("Evaluation %1 added to run %2 (%3, %4 endpoint(s)); the "
                                         "raw points are unchanged.")
                              .arg(*id)
                              .arg(run_id)
                              .arg(q(result->method))
                              .arg(result->endpoints.size()));
    }
    emit reevaluation_finished(true, *id);
  });
  message_->show_info(QStringLiteral("Evaluating run %1 with %2...").arg(run_id).arg(q(method)));
  launch(thread);
  return {};
}

Result<void> ResultsView::choose_evaluation(std::int64_t evaluation_id) {
  if (store_ == nullptr || !run_id_)
    return make_error(ErrorKind::invalid_input, "choose a run first");
  auto trail = open_audit_trail(*store_);
  if (!trail) {
    fail(trail.error());
    return trail.error();
  }
  auto who = credentials_(CredentialsRequest{
      QStringLiteral("Use evaluation %1 for run %2").arg(evaluation_id).arg(*run_id_),
      "The results of the run will use this evaluation. A reason is required; your name, the "
      "reason and the time are recorded in the audit trail.",
      true, "&Reason:"});
  if (!who) {
    message_->show_info("Cancelled: the choice of evaluation is unchanged.");
    return make_error(ErrorKind::aborted, "cancelled");
  }
  auto chosen =
      (*trail)->choose_evaluation(who->user, who->password, *run_id_, evaluation_id, who->reason);
  if (!chosen) {
    fail(chosen.error());
    return chosen.error();
  }
  // The results of the chosen evaluation, as new records beside the old.
  auto results = controller::add_results_for_evaluation(*store_, *run_id_, evaluation_id);
  (void)draw_run();
  fill_audit();
  if (!results) {
    fail(results.error());
    return results.error();
  }
  message_->show_info(
      QStringLiteral("Run %1 now uses evaluation %2 (recorded); %3 results from it.")
          .arg(*run_id_)
          .arg(evaluation_id)
          .arg(results->size()));
  return {};
}

Result<void> ResultsView::sign_off(const std::string& meaning) {
  if (store_ == nullptr || !run_id_)
    return make_error(ErrorKind::invalid_input, "choose a run to sign off first");
  auto trail = open_audit_trail(*store_);
  if (!trail) {
    fail(trail.error());
    return trail.error();
  }
  auto who = credentials_(CredentialsRequest{
      QStringLiteral("Sign off run %1").arg(*run_id_),
      QStringLiteral("Your signature means: \"%1\". Enter your password again to sign.")
          .arg(q(meaning)),
      false,
      {}});
  if (!who) {
    message_->show_info("Cancelled: not signed.");
    return make_error(ErrorKind::aborted, "cancelled");
  }
  auto signed_off = (*trail)->sign_off(who->user, who->password, *run_id_, meaning);
  if (!signed_off) {
    fail(signed_off.error());
    return signed_off.error();
  }
  fill_run_summary();
  fill_audit();
  message_->show_info(QStringLiteral("Run %1 signed off by %2 (audit record %3).")
                          .arg(*run_id_)
                          .arg(q(who->user))
                          .arg(signed_off->audit_sequence));
  return {};
}

// ---------------------------------------------------------------------------
// Output

Result<void> ResultsView::export_listed(const std::string& path, const std::string& format,
                                        const std::string& table) {
  if (store_ == nullptr)
    return make_error(ErrorKind::invalid_input, "no store is open");
  const auto ids = listed_runs();
  if (ids.empty()) {
    auto error = make_error(ErrorKind::invalid_input, "no runs are listed: nothing to export");
    fail(error);
    return error;
  }
  std::string text;
  if (format == "json") {
    auto json = cli::export_json(*store_, ids);
    if (!json) {
      fail(json.error());
      return json.error();
    }
    text = json->dump(2) + "\n";
  } else {
    const auto which = cli::export_table_from_name(table);
    if (!which)
      return make_error(ErrorKind::invalid_input, "unknown export table '" + table + "'");
    auto csv = cli::export_csv(*store_, ids, *which);
    if (!csv) {
      fail(csv.error());
      return csv.error();
    }
    text = std::move(csv).value();
  }
  if (auto written = cli::write_text_file(path, text); !written) {
    fail(written.error());
    return written.error();
  }
  message_->show_info(QStringLiteral("%1 run(s) exported to %2.").arg(ids.size()).arg(q(path)));
  return {};
}

Result<void> ResultsView::write_run_pdf(const std::string& path) {
  if (store_ == nullptr || !run_id_)
    return make_error(ErrorKind::invalid_input, "choose a run first");
  std::unique_ptr<store::AuditTrail> trail;
  if (auto t = open_audit_trail(*store_); t)
    trail = std::move(t).value();
  report::ReportSources sources{*store_, store_, trail.get()};
  auto data = report::run_report_data(sources, *run_id_);
  if (!data) {
    fail(data.error());
    return data.error();
  }
  if (auto written = report::write_run_report(*data, path); !written) {
    fail(written.error());
    return written.error();
  }
  message_->show_info(QStringLiteral("Report of run %1 written to %2.").arg(*run_id_).arg(q(path)));
  return {};
}

Result<void> ResultsView::write_series_pdf(const std::string& path) {
  if (store_ == nullptr || !series_id_)
    return make_error(ErrorKind::invalid_input, "choose a series first");
  std::unique_ptr<store::AuditTrail> trail;
  if (auto t = open_audit_trail(*store_); t)
    trail = std::move(t).value();
  report::ReportSources sources{*store_, store_, trail.get()};
  auto data = report::stored_series_report_data(sources, *store_, *series_id_);
  if (!data) {
    fail(data.error());
    return data.error();
  }
  if (auto written = report::write_series_report(*data, path); !written) {
    fail(written.error());
    return written.error();
  }
  message_->show_info(
      QStringLiteral("Report of series %1 written to %2.").arg(*series_id_).arg(q(path)));
  return {};
}

// ---------------------------------------------------------------------------
// Series, control chart, audit

Result<void> ResultsView::show_series(std::int64_t series_id) {
  if (store_ == nullptr)
    return make_error(ErrorKind::invalid_input, "no store is open");
  auto series = store_->load_series(series_id);
  if (!series)
    return series.error();
  auto entries = store_->load_entries(series_id);
  if (!entries)
    return entries.error();
  series_id_ = series_id;
  series_summary_->setText(QStringLiteral("Series %1 '%2': %3, %4 entries, started %5. %6")
                               .arg(series_id)
                               .arg(q(series->name), store::series_status_name(series->status))
                               .arg(entries->size())
                               .arg(q(readable_utc(series->started_utc)), q(series->reason)));
  statistics_->setRowCount(0);
  int row = 0;
  for (const auto& entry : *entries) {
    auto results = store_->load_entry_results(entry.id);
    if (!results)
      return results.error();
    auto determinations = store_->load_determinations(entry.id);
    if (!determinations)
      return determinations.error();
    auto add_row = [&](const store::EntryResultRecord* r) {
      statistics_->insertRow(row);
      set_cell(statistics_, row, 0, q(entry.label));
      set_cell(statistics_, row, 1, q(entry.kind));
      set_cell(statistics_, row, 2, q(entry.status));
      if (r != nullptr) {
        set_cell(statistics_, row, 3, q(r->name));
        set_cell(statistics_, row, 4, significant(r->value, 5));
        set_cell(statistics_, row, 5, q(r->unit));
        set_cell(statistics_, row, 6, QString::number(r->count));
        set_cell(statistics_, row, 7, r->count > 1 ? significant(r->sd, 3) : "-");
        set_cell(statistics_, row, 8, r->count > 1 ? fixed(r->rsd_percent, 2) : "-");
        QStringList values;
        for (const auto& d : *determinations)
          if (d.counted && d.unit == r->unit)
            values << significant(d.value, 5);
        set_cell(statistics_, row, 9, values.join(", "));
        set_cell(statistics_, row, 10, q(r->flags));
      } else {
        set_cell(statistics_, row, 3, "no result");
        set_cell(statistics_, row, 10, q(entry.note));
      }
      if (entry.status == "flagged" || entry.status == "failed")
        for (int c = 0; c < statistics_->columnCount(); ++c)
          if (auto* item = statistics_->item(row, c))
            item->setBackground(QColor(0xFFF3E0));
      ++row;
    };
    if (results->empty())
      add_row(nullptr);
    for (const auto& r : *results)
      add_row(&r);
  }
  return {};
}

Result<void> ResultsView::show_control_history(int index) {
  if (index < 0 || index >= static_cast<int>(histories_.size()))
    return make_error(ErrorKind::not_found, "no control history " + std::to_string(index));
  if (history_combo_->currentIndex() != index) {
    QSignalBlocker block(history_combo_);
    history_combo_->setCurrentIndex(index);
  }
  const auto& h = histories_[static_cast<std::size_t>(index)];
  std::vector<double> values;
  for (const auto& p : h.points)
    values.push_back(p.value);
  const auto limits = control_limits(values);
  ChartContent content;
  content.title = q(h.title);
  content.x_title = "date (UTC)";
  content.y_title = "value (" + q(h.unit) + ")";
  content.x_is_time = true;
  ChartLine line;
  line.label = "values";
  for (const auto& p : h.points) {
    line.x.push_back(epoch_ms(p.when_utc));
    line.y.push_back(p.value);
  }
  ChartLine dots = line;
  dots.style = ChartLine::Style::points;
  dots.label = "determinations";
  content.lines.push_back(std::move(line));
  content.lines.push_back(std::move(dots));
  if (limits) {
    content.horizontals.push_back(
        {"mean " + significant(limits->mean, 5), limits->mean, 0x2E7D32, ChartLine::Style::solid});
    content.horizontals.push_back(
        {"warning (mean +/- 2 s)", limits->upper_warning, 0xEF6C00, ChartLine::Style::dashed});
    content.horizontals.push_back({"", limits->lower_warning, 0xEF6C00, ChartLine::Style::dashed});
    content.horizontals.push_back(
        {"action (mean +/- 3 s)", limits->upper_action, 0xC62828, ChartLine::Style::dashed});
    content.horizontals.push_back({"", limits->lower_action, 0xC62828, ChartLine::Style::dashed});
    control_caption_->setText(QStringLiteral("%1 values, mean %2 %3, s = %4 %3. Rule: %5.")
                                  .arg(limits->count)
                                  .arg(significant(limits->mean, 5), q(h.unit),
                                       significant(limits->sd, 3), kControlRuleText));
  } else {
    control_caption_->setText(QStringLiteral("No limits drawn: %1. Rule once there are enough: %2.")
                                  .arg(q(limits.error().message), kControlRuleText));
  }
  control_chart_->show(content);
  control_points_->setRowCount(0);
  for (std::size_t i = 0; i < h.points.size(); ++i) {
    const auto& p = h.points[i];
    const int row = static_cast<int>(i);
    control_points_->insertRow(row);
    set_cell(control_points_, row, 0, q(readable_utc(p.when_utc)));
    set_cell(control_points_, row, 1, significant(p.value, 6));
    set_cell(control_points_, row, 2, q(h.unit));
    if (limits) {
      const auto verdict = control_verdict(*limits, p.value);
      set_cell(control_points_, row, 3, control_verdict_text(verdict));
      if (verdict != ControlVerdict::within)
        control_points_->item(row, 3)->setBackground(
            QColor(verdict == ControlVerdict::action ? 0xFFCDD2 : 0xFFE0B2));
    } else {
      set_cell(control_points_, row, 3, "no limits yet");
    }
    set_cell(control_points_, row, 4, q(p.source));
  }
  control_points_->resizeColumnsToContents();
  return {};
}

void ResultsView::fill_audit() {
  audit_->setRowCount(0);
  if (store_ == nullptr)
    return;
  if (!store_has_users(*store_)) {
    audit_verdict_->setText("This store has no users yet, so it has no audit trail.");
    return;
  }
  auto trail = open_audit_trail(*store_);
  if (!trail) {
    audit_verdict_->setText("Problem: " + q(trail.error().message));
    return;
  }
  auto records = (*trail)->records();
  if (!records) {
    audit_verdict_->setText("Problem: " + q(records.error().message));
    return;
  }
  int row = 0;
  for (auto it = records->rbegin(); it != records->rend(); ++it, ++row) {  // newest first
    audit_->insertRow(row);
    set_cell(audit_, row, 0, QString::number(it->sequence));
    set_cell(audit_, row, 1, q(readable_utc(it->at_utc)));
    set_cell(audit_, row, 2, q(it->user));
    set_cell(audit_, row, 3, q(it->action));
    set_cell(audit_, row, 4, q(it->subject));
    set_cell(audit_, row, 5, q(it->old_value));
    set_cell(audit_, row, 6, q(it->new_value));
    set_cell(audit_, row, 7, q(it->reason));
  }
  audit_->resizeColumnsToContents();
}

Result<controller::audit::Verification> ResultsView::verify_audit() {
  if (store_ == nullptr)
    return make_error(ErrorKind::invalid_input, "no store is open");
  auto trail = open_audit_trail(*store_);
  if (!trail) {
    fail(trail.error());
    return trail.error();
  }
  auto verdict = (*trail)->verify();
  if (!verdict) {
    fail(verdict.error());
    return verdict.error();
  }
  fill_audit();
  if (verdict->intact) {
    audit_verdict_->setStyleSheet("QLabel { color: #1B5E20; }");
    audit_verdict_->setText(
        QStringLiteral("Intact: %1 record(s), chain and keyed head check.").arg(verdict->records));
  } else {
    audit_verdict_->setStyleSheet("QLabel { color: #8E0000; font-weight: bold; }");
    audit_verdict_->setText("NOT INTACT: " + q(verdict->problem));
  }
  return verdict;
}

}  // namespace veq::ui::review
