#include "ui/series_view.hpp"

#include <fstream>
#include <sstream>

#include <QtGui/QClipboard>
#include <QtGui/QGuiApplication>
#include <QtGui/QKeySequence>
#include <QtGui/QShortcut>
#include <QtWidgets/QFileDialog>
#include <QtWidgets/QHBoxLayout>
#include <QtWidgets/QHeaderView>
#include <QtWidgets/QLabel>
#include <QtWidgets/QLineEdit>
#include <QtWidgets/QListWidget>
#include <QtWidgets/QProgressBar>
#include <QtWidgets/QPushButton>
#include <QtWidgets/QSpinBox>
#include <QtWidgets/QSplitter>
#include <QtWidgets/QTableWidget>
#include <QtWidgets/QVBoxLayout>

#include "controller/series/series_file.hpp"
#include "ui/rack.hpp"
#include "ui/rack_worker.hpp"

namespace veq::ui {

namespace {

QString q(const std::string& s) {
  return QString::fromStdString(s);
}

QColor status_colour(const QString& status) {
  if (status == "done")
    return QColor(0xC8, 0xE6, 0xC9);
  if (status == "flagged")
    return QColor(0xFF, 0xE0, 0xB2);
  if (status == "failed" || status == "skipped")
    return QColor(0xFF, 0xCD, 0xD2);
  if (status == "running")
    return QColor(0xBB, 0xDE, 0xFB);
  return QColor(Qt::white);
}

}  // namespace

SeriesView::SeriesView(RackWorker& worker, std::function<std::string()> database_path,
                       QWidget* parent)
    : QWidget(parent), worker_(worker), database_path_(std::move(database_path)) {
  name_ = new QLineEdit("series");
  name_->setAccessibleName("series name");
  check_every_ = new QSpinBox();
  check_every_->setRange(0, 100);
  check_every_->setToolTip(
      "A check standard row runs after every this many samples and at the "
      "end; 0: only where the queue places it");
  auto* head = new QHBoxLayout();
  auto* name_label = new QLabel("Series &name:");
  name_label->setBuddy(name_);
  auto* every_label = new QLabel("Check standard &every (samples):");
  every_label->setBuddy(check_every_);
  head->addWidget(name_label);
  head->addWidget(name_, 1);
  head->addWidget(every_label);
  head->addWidget(check_every_);

  table_ = new QTableWidget(0, kQueueColumnCount + 2);
  QStringList titles;
  for (int c = 0; c < kQueueColumnCount; ++c)
    titles << queue_column_title(static_cast<QueueColumn>(c));
  titles << "Status"
         << "Result";
  table_->setHorizontalHeaderLabels(titles);
  table_->horizontalHeader()->setStretchLastSection(true);
  // Status and result beside the sample's name, where the eye is; pasting
  // keeps the queue's own column order.
  table_->horizontalHeader()->moveSection(kStatusColumn, 1);
  table_->horizontalHeader()->moveSection(kResultColumn, 2);
  table_->setAccessibleName("series queue");
  table_->setToolTip(
      "Kind: sample, blank or conditioning (titer, calibration, burette check and check "
      "standard rows come from a series file). Size: one number for all replicates or one per "
      "position. Unit: mL (aliquot), g (weighed) or 'g from balance'. Positions: 11, 12 or "
      "11-12.");

  auto button = [](const QString& text, const QString& keys, const QString& tip) {
    auto* b = new QPushButton(text);
    if (!keys.isEmpty())
      b->setShortcut(QKeySequence(keys));
    b->setToolTip(keys.isEmpty() ? tip : tip + " (" + keys + ")");
    return b;
  };
  auto* add = button("Add row", "Ctrl+Ins", "Adds an empty row below the current one");
  auto* remove = button("Remove rows", "Ctrl+Del", "Removes the selected rows");
  auto* paste = button("Paste rows", "Ctrl+Shift+V",
                       "Pastes rows copied from a spreadsheet (cells separated by tabs)");
  auto* open =
      button("Open series file...", "Ctrl+Shift+O", "Loads a series file (docs/series.md)");
  auto* demo = button("Demo rack", "", "Loads the demo rack's queue (for simulated instruments)");
  weigh_ = button("Read masses", "Ctrl+B",
                  "Weighs every portion whose unit is 'g from balance' on the connected balance");
  connect(add, &QPushButton::clicked, this, &SeriesView::insert_row);
  connect(remove, &QPushButton::clicked, this, &SeriesView::remove_rows);
  connect(paste, &QPushButton::clicked, this,
          [this] { paste_text(QGuiApplication::clipboard()->text()); });
  connect(open, &QPushButton::clicked, this, &SeriesView::open_series_file);
  connect(demo, &QPushButton::clicked, this, &SeriesView::load_demo_series);
  connect(weigh_, &QPushButton::clicked, this, &SeriesView::read_masses);
  // Ctrl+V in the table pastes rows, as in a spreadsheet.
  auto* paste_keys = new QShortcut(QKeySequence::Paste, table_);
  paste_keys->setContext(Qt::WidgetWithChildrenShortcut);
  connect(paste_keys, &QShortcut::activated, this,
          [this] { paste_text(QGuiApplication::clipboard()->text()); });
  auto* edit_row = new QHBoxLayout();
  for (auto* b : {add, remove, paste, open, demo, weigh_})
    edit_row->addWidget(b);
  edit_row->addStretch(1);

  start_ = button("Start", "Ctrl+Return", "Checks the queue and starts the series");
  pause_ = button("Pause after this vessel", "Ctrl+P",
                  "The vessel being worked on is finished; then the series waits until you "
                  "resume");
  pause_->setCheckable(true);
  abort_ = button("Abort", "Ctrl+Shift+A",
                  "Stops the burettes and ends the series now; every stored point stays");
  connect(start_, &QPushButton::clicked, this, &SeriesView::start);
  connect(pause_, &QPushButton::toggled, this, &SeriesView::set_paused);
  connect(abort_, &QPushButton::clicked, this, &SeriesView::abort);
  progress_ = new QProgressBar();
  progress_->setFormat("%v of %m entries");
  progress_->setValue(0);
  auto* run_row = new QHBoxLayout();
  run_row->addWidget(start_);
  run_row->addWidget(pause_);
  run_row->addWidget(abort_);
  run_row->addWidget(progress_, 1);

  message_ = new QLabel();
  message_->setWordWrap(true);
  message_->setTextInteractionFlags(Qt::TextSelectableByMouse);
  instruction_ = new QLabel();
  instruction_->setWordWrap(true);
  instruction_->setStyleSheet("background: #FFF8E1; padding: 6px; font-weight: bold;");
  instruction_done_ = new QPushButton("Done (Ctrl+D)");
  instruction_done_->setShortcut(QKeySequence("Ctrl+D"));
  connect(instruction_done_, &QPushButton::clicked, this, &SeriesView::confirm_instruction);
  auto* instruction_row = new QHBoxLayout();
  instruction_row->addWidget(instruction_, 1);
  instruction_row->addWidget(instruction_done_);
  instruction_->hide();
  instruction_done_->hide();

  flagged_ = new QListWidget();
  flagged_->setAccessibleName("flagged results");
  auto* flagged_box = new QWidget();
  auto* flagged_layout = new QVBoxLayout(flagged_box);
  flagged_layout->setContentsMargins(0, 0, 0, 0);
  flagged_layout->addWidget(new QLabel("Flagged and failed entries"));
  flagged_layout->addWidget(flagged_);
  auto* split = new QSplitter(Qt::Vertical);
  split->addWidget(table_);
  split->addWidget(flagged_box);
  split->setStretchFactor(0, 4);
  split->setStretchFactor(1, 1);

  auto* layout = new QVBoxLayout(this);
  layout->addLayout(head);
  layout->addLayout(edit_row);
  layout->addWidget(split, 1);
  layout->addLayout(instruction_row);
  layout->addWidget(message_);
  layout->addLayout(run_row);
  set_running(false);

  connect(&worker_, &RackWorker::series_started, this, [this](const QString& name, int entries) {
    progress_->setMaximum(std::max(1, entries));
    progress_->setValue(0);
    show_message("Series '" + name + "' running.", false);
  });
  connect(&worker_, &RackWorker::entry_started, this, [this](const QString&, const QString& label) {
    current_row_ = row_for_label(label);
    if (current_row_ >= 0) {
      set_status(current_row_, "running", QString());
      table_->scrollToItem(table_->item(current_row_, 0));
    }
  });
  connect(&worker_, &RackWorker::determination_stored, this,
          [this](int position, double value, const QString& unit, bool counted, const QString&) {
            if (current_row_ < 0 || unit.isEmpty())
              return;
            auto* cell = table_->item(current_row_, kResultColumn);
            const QString before = cell ? cell->text() : QString();
            const QString one = QString("%1: %2 %3%4")
                                    .arg(position)
                                    .arg(value, 0, 'g', 6)
                                    .arg(unit, counted ? "" : " (left out)");
            table_->setItem(current_row_, kResultColumn,
                            new QTableWidgetItem(before.isEmpty() ? one : before + "; " + one));
          });
  connect(&worker_, &RackWorker::entry_ended, this,
          [this](const QString& label, const QString& status, const QString& note) {
            const int row = current_row_ >= 0 ? current_row_ : row_for_label(label);
            if (row >= 0)
              set_status(row, status, note);
            ++entries_ended_;
            progress_->setMaximum(std::max(progress_->maximum(), entries_ended_));
            progress_->setValue(entries_ended_);
            if (status != "done") {
              QString first_line = note.section('\n', 0, 0);
              auto* item = new QListWidgetItem(
                  QString("row %1, %2: %3 - %4").arg(row + 1).arg(label, status, first_line));
              item->setToolTip(note);
              item->setBackground(status_colour(status));
              flagged_->addItem(item);
            }
            current_row_ = -1;
          });
  connect(&worker_, &RackWorker::paused_between_vessels, this, [this](bool waiting) {
    if (waiting)
      show_message(
          "Paused: the last vessel is finished. Press Resume (Ctrl+P) to go on or "
          "Abort to end the series.",
          false);
    else
      show_message("Running again.", false);
  });
  connect(&worker_, &RackWorker::series_finished, this,
          [this](const QString& status, const QString& reason) {
            if (!running_)
              return;
            // The outcome's means, by entry (rows and entries go in step).
            for (const auto& e : worker_.last_outcome().entries) {
              const int row = row_for_label(q(e.label));
              if (row >= 0 && e.mean) {
                auto* item = new QTableWidgetItem(QString("%1 %2 (mean of %3)")
                                                      .arg(*e.mean, 0, 'g', 6)
                                                      .arg(q(e.unit))
                                                      .arg(e.values.size()));
                item->setToolTip(table_->item(row, kResultColumn)
                                     ? table_->item(row, kResultColumn)->text()
                                     : QString());
                table_->setItem(row, kResultColumn, item);
              }
            }
            set_running(false);
            show_message("Series " + status + ": " + reason, status != "completed");
            emit series_finished(status, reason);
          });
  connect(&worker_, &RackWorker::problem, this, [this](const QString& m) {
    if (running_)
      show_message(m, true);
  });
  connect(&worker_, &RackWorker::weighing_instruction, this, [this](const QString& text) {
    instruction_->setText(text + " Then press Done.");
    instruction_->show();
    instruction_done_->show();
    instruction_done_->setFocus();
  });
  connect(&worker_, &RackWorker::weighing_done, this,
          [this](int weighed, int failed, const QString& notes) {
            instruction_->hide();
            instruction_done_->hide();
            set_running(false);
            if (weighed > 0 || failed > 0) {
              // Rows and the weighed series' entries go in step.
              const auto& s = worker_.weighed_series();
              std::vector<QueueRow> rows = this->rows();
              // (empty rows have no entry).
              std::size_t entry = 0;
              for (std::size_t i = 0; i < rows.size() && entry < s.entries.size(); ++i) {
                if (row_is_empty(rows[i]))
                  continue;
                const auto& e = s.entries[entry++];
                if (e.portions.empty() || !e.portions.front().from_balance)
                  continue;
                rows[i].cell(QueueColumn::size) = portions_text(e.portions);
                if (rows[i].original)
                  rows[i].original = e;
              }
              set_rows(rows);
            }
            show_message(QString("%1 portions weighed, %2 without a mass.\n%3")
                             .arg(weighed)
                             .arg(failed)
                             .arg(notes),
                         failed > 0);
          });
}

std::vector<QueueRow> SeriesView::rows() const {
  std::vector<QueueRow> rows;
  for (int r = 0; r < table_->rowCount(); ++r) {
    QueueRow row;
    for (int c = 0; c < kQueueColumnCount; ++c) {
      const auto* item = table_->item(r, c);
      row.cells[static_cast<std::size_t>(c)] =
          item ? item->text().trimmed().toStdString() : std::string();
    }
    if (const auto* first = table_->item(r, 0); first && first->data(Qt::UserRole).isValid()) {
      const int index = first->data(Qt::UserRole).toInt();
      if (index >= 0 && index < static_cast<int>(kept_entries_.size()))
        row.original = kept_entries_[static_cast<std::size_t>(index)];
    }
    // Empty rows stay, so that a row's number is the one the table shows.
    rows.push_back(std::move(row));
  }
  return rows;
}

void SeriesView::set_rows(const std::vector<QueueRow>& rows) {
  table_->setRowCount(0);
  kept_entries_.clear();
  table_->setRowCount(static_cast<int>(rows.size()));
  for (int r = 0; r < static_cast<int>(rows.size()); ++r) {
    const QueueRow& row = rows[static_cast<std::size_t>(r)];
    for (int c = 0; c < kQueueColumnCount; ++c)
      table_->setItem(r, c, new QTableWidgetItem(q(row.cells[static_cast<std::size_t>(c)])));
    if (row.original) {
      kept_entries_.push_back(*row.original);
      table_->item(r, 0)->setData(Qt::UserRole, static_cast<int>(kept_entries_.size()) - 1);
    }
    set_status(r, "waiting", QString());
  }
  table_->resizeColumnsToContents();
  table_->setColumnWidth(kResultColumn, 220);
}

bool SeriesView::paste_text(const QString& text) {
  if (running_) {
    show_message("The queue cannot change while the series runs.", true);
    return false;
  }
  int at = table_->currentRow() >= 0 ? table_->currentRow() + 1 : table_->rowCount();
  // An empty row under the cursor is filled rather than pushed down.
  auto empty_row = [this](int r) {
    for (int c = 0; c < kQueueColumnCount; ++c)
      if (table_->item(r, c) && !table_->item(r, c)->text().trimmed().isEmpty())
        return false;
    return true;
  };
  if (table_->currentRow() >= 0 && empty_row(table_->currentRow()))
    at = table_->currentRow();
  auto pasted = parse_pasted_rows(text.toStdString(), at + 1);
  if (!pasted) {
    show_message("Nothing pasted: " + q(pasted.error().message), true);
    return false;
  }
  if (at < table_->rowCount() && empty_row(at))
    table_->removeRow(at);
  for (const auto& row : *pasted) {
    table_->insertRow(at);
    for (int c = 0; c < kQueueColumnCount; ++c)
      table_->setItem(at, c, new QTableWidgetItem(q(row.cells[static_cast<std::size_t>(c)])));
    set_status(at, "waiting", QString());
    ++at;
  }
  show_message(QString("%1 rows pasted.").arg(pasted->size()), false);
  return true;
}

bool SeriesView::load_series_text(const std::string& text, const std::string& origin) {
  auto s = series::parse_series(text, origin);
  if (!s) {
    show_message(q(s.error().message), true);
    return false;
  }
  std::vector<QueueRow> rows;
  for (const auto& e : s->entries)
    rows.push_back(entry_to_row(e));
  set_rows(rows);
  name_->setText(q(s->name));
  check_every_->setValue(s->check_standard_every);
  flagged_->clear();
  show_message(QString("%1 entries loaded from %2.").arg(rows.size()).arg(q(origin)), false);
  return true;
}

void SeriesView::load_demo_series() {
  load_series_text(demo_series_text(), "the demo rack");
}

void SeriesView::open_series_file() {
  const QString path = QFileDialog::getOpenFileName(this, "Open a series file", QString(),
                                                    "Series files (*.series *.txt);;All files (*)");
  if (path.isEmpty())
    return;
  std::ifstream in(path.toStdString(), std::ios::binary);
  if (!in) {
    show_message("Cannot read " + path + ": check that the file exists and is readable.", true);
    return;
  }
  std::ostringstream text;
  text << in.rdbuf();
  load_series_text(text.str(), path.toStdString());
}

bool SeriesView::start() {
  if (running_)
    return false;
  auto s = rows_to_series(rows(), name_->text().trimmed().toStdString(), check_every_->value());
  if (!s) {
    show_message("The series cannot start: " + q(s.error().message), true);
    return false;
  }
  const std::string db = database_path_ ? database_path_() : std::string();
  if (db.empty()) {
    show_message(
        "The series cannot start: no database is open. Open one or create a new one "
        "(File menu).",
        true);
    return false;
  }
  for (int r = 0; r < table_->rowCount(); ++r) {
    set_status(r, "waiting", QString());
    table_->setItem(r, kResultColumn, new QTableWidgetItem());
  }
  flagged_->clear();
  entries_ended_ = 0;
  current_row_ = -1;
  progress_->setMaximum(static_cast<int>(s->entries.size()));
  progress_->setValue(0);
  set_running(true);
  show_message("Starting: checking the instruments...", false);
  worker_.start_series(*s, db, simulated_);
  return true;
}

void SeriesView::set_paused(bool paused) {
  if (pause_->isChecked() != paused)
    pause_->setChecked(paused);  // comes back through toggled
  pause_->setText(paused ? "Resume" : "Pause after this vessel");
  pause_->setShortcut(QKeySequence("Ctrl+P"));
  worker_.set_paused(paused);
  if (paused && running_)
    show_message("Pausing: the vessel being worked on is finished first, then the series waits.",
                 false);
}

void SeriesView::abort() {
  if (!running_)
    return;
  show_message("Aborting: stopping the burettes...", true);
  worker_.abort();
}

bool SeriesView::read_masses() {
  if (running_)
    return false;
  auto s = rows_to_series(rows(), name_->text().trimmed().toStdString(), check_every_->value());
  if (!s) {
    show_message("Cannot weigh: " + q(s.error().message), true);
    return false;
  }
  set_running(true);
  start_->setEnabled(false);
  show_message("Weighing: follow the instructions.", false);
  worker_.weigh(*s);
  return true;
}

void SeriesView::confirm_instruction() {
  instruction_->setText(instruction_->text() + " (reading the balance...)");
  instruction_done_->hide();
  worker_.continue_weighing();
}

QString SeriesView::message() const {
  return message_->text();
}

QString SeriesView::instruction() const {
  return instruction_->isVisibleTo(this) ? instruction_->text() : QString();
}

QString SeriesView::status_of(int row) const {
  const auto* item = table_->item(row, kStatusColumn);
  return item ? item->text() : QString();
}

QString SeriesView::result_of(int row) const {
  const auto* item = table_->item(row, kResultColumn);
  return item ? item->text() : QString();
}

int SeriesView::flagged_count() const {
  return flagged_->count();
}

void SeriesView::show_message(const QString& text, bool error) {
  message_->setText(text);
  message_->setStyleSheet(error ? "color: #b71c1c; font-weight: bold;" : QString());
  if (error)
    emit problem(text);
}

void SeriesView::set_running(bool running) {
  running_ = running;
  start_->setEnabled(!running);
  weigh_->setEnabled(!running);
  pause_->setEnabled(running);
  abort_->setEnabled(running);
  table_->setEditTriggers(running ? QAbstractItemView::NoEditTriggers
                                  : QAbstractItemView::AllEditTriggers);
  if (!running && pause_->isChecked())
    set_paused(false);
}

int SeriesView::row_for_label(const QString& label) const {
  // The runner names an entry by its identity; a check standard repeated
  // every N samples gets " #2"... after it.
  int fallback = -1;
  for (int r = 0; r < table_->rowCount(); ++r) {
    const auto* id = table_->item(r, 0);
    const auto* kind = table_->item(r, 1);
    const QString name = id && !id->text().trimmed().isEmpty()
                             ? id->text().trimmed()
                             : (kind ? kind->text().trimmed() : QString());
    if (name.isEmpty() || !(label == name || label.startsWith(name + " #")))
      continue;
    if (status_of(r) == "waiting")
      return r;
    if (fallback < 0)
      fallback = r;
  }
  return fallback;
}

void SeriesView::set_status(int row, const QString& status, const QString& note) {
  auto* item = new QTableWidgetItem(status);
  item->setFlags(item->flags() & ~Qt::ItemIsEditable);
  item->setToolTip(note);
  item->setBackground(status_colour(status));
  table_->setItem(row, kStatusColumn, item);
}

void SeriesView::insert_row() {
  if (running_)
    return;
  const int at = table_->currentRow() >= 0 ? table_->currentRow() + 1 : table_->rowCount();
  table_->insertRow(at);
  table_->setItem(at, static_cast<int>(QueueColumn::kind), new QTableWidgetItem("sample"));
  table_->setItem(at, static_cast<int>(QueueColumn::unit), new QTableWidgetItem(kAliquotUnit));
  set_status(at, "waiting", QString());
  table_->setCurrentCell(at, 0);
}

void SeriesView::remove_rows() {
  if (running_)
    return;
  QList<int> rows;
  for (const auto& range : table_->selectedRanges())
    for (int r = range.topRow(); r <= range.bottomRow(); ++r)
      rows << r;
  std::sort(rows.begin(), rows.end(), std::greater<int>());
  for (int r : rows)
    table_->removeRow(r);
}

}  // namespace veq::ui
