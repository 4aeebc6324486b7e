// The Series view: the queue of a rack as a table (typed, pasted from a
// spreadsheet, or opened from a series file), masses read from the balance,
// and the series started, paused (after the vessel being worked on) and
// aborted, with its progress, each entry's status and result, and the
// flagged results.
#pragma once

#include <functional>
#include <string>
#include <vector>

#include <QtWidgets/QWidget>

#include "ui/queue_table.hpp"

class QLabel;
class QLineEdit;
class QListWidget;
class QProgressBar;
class QPushButton;
class QSpinBox;
class QTableWidget;

namespace veq::ui {

class RackWorker;

class SeriesView : public QWidget {
  Q_OBJECT

 public:
  /// Extra columns after the queue's own: what the run made of each entry.
  static constexpr int kStatusColumn = kQueueColumnCount;
  static constexpr int kResultColumn = kQueueColumnCount + 1;

  /// `database_path` says where the series is stored (empty: none chosen).
  SeriesView(RackWorker& worker, std::function<std::string()> database_path,
             QWidget* parent = nullptr);

  /// The queue as rows of text.
  std::vector<QueueRow> rows() const;
  void set_rows(const std::vector<QueueRow>& rows);
  /// Pastes tab-separated rows below the current row (or at the end). A row
  /// that does not check out leaves the table as it was, and the message
  /// names the row and the column.
  bool paste_text(const QString& text);
  /// Loads a series file (or text) into the table.
  bool load_series_text(const std::string& text, const std::string& origin);
  /// The demo rack's series (conditioning, calibration, burette check,
  /// blank, titer, samples, check standards).
  void load_demo_series();

  /// Checks the queue and starts it; false (with the message shown) if a row
  /// is wrong or nothing can run.
  bool start();
  void set_paused(bool paused);
  void abort();
  /// Weighs the rows whose unit is "g from balance".
  bool read_masses();
  /// The operator has done what the weighing instruction asks.
  void confirm_instruction();

  /// Whether the instruments are the simulated demo rack (its methods are
  /// then stored before the series runs).
  void set_simulated(bool simulated) { simulated_ = simulated; }

  QString message() const;
  QString status_of(int row) const;
  QString result_of(int row) const;
  int flagged_count() const;
  bool running() const { return running_; }
  QString instruction() const;

 signals:
  void series_finished(const QString& status, const QString& reason);
  void problem(const QString& message);

 private:
  void show_message(const QString& text, bool error);
  void set_running(bool running);
  int row_for_label(const QString& label) const;
  void set_status(int row, const QString& status, const QString& note);
  void insert_row();
  void remove_rows();
  void open_series_file();

  RackWorker& worker_;
  std::function<std::string()> database_path_;
  QLineEdit* name_ = nullptr;
  QSpinBox* check_every_ = nullptr;
  QTableWidget* table_ = nullptr;
  QLabel* message_ = nullptr;
  QLabel* instruction_ = nullptr;
  QPushButton* instruction_done_ = nullptr;
  QPushButton* start_ = nullptr;
  QPushButton* pause_ = nullptr;
  QPushButton* abort_ = nullptr;
  QPushButton* weigh_ = nullptr;
  QProgressBar* progress_ = nullptr;
  QListWidget* flagged_ = nullptr;
  /// Entries opened from a file, by the index kept in their row's first
  /// cell: they carry what the table does not show.
  std::vector<series::Entry> kept_entries_;
  bool simulated_ = false;
  bool running_ = false;
  int current_row_ = -1;
  int entries_ended_ = 0;
};

}  // namespace veq::ui
