// veq-gui's window: a list of views on the left (Instruments, Series, Live
// run, Stored runs, and whatever add_view() brings), the instrument worker
// that every view shares, the database in use, and the window's layout
// remembered between sessions.
#pragma once

#include <functional>
#include <memory>
#include <string>
#include <vector>

#include <QtWidgets/QMainWindow>

#include "common/result.hpp"
#include "controller/store/sqlite_store.hpp"

class QListWidget;
class QSettings;
class QStackedWidget;
class QMenu;

namespace veq::ui {

class InstrumentsView;
class LiveRunView;
class RackWorker;
class RunBrowser;
class SeriesView;
namespace review {
class MethodEditorView;
class ResultsView;
class SuppliesView;
}  // namespace review

struct MainWindowOptions {
  /// Where the window's layout and the instruments' connections are kept: an
  /// INI file (tests give one in a temporary folder); empty: the user's own
  /// settings of veq-gui (QSettings "veq"/"veq-gui").
  QString settings_path;
};

class MainWindow : public QMainWindow {
  Q_OBJECT

 public:
  explicit MainWindow(QWidget* parent = nullptr, MainWindowOptions options = {});
  ~MainWindow() override;

  /// Adds a view to the list on the left and to the View menu (Ctrl+1...
  /// Ctrl+9 for the first nine). The window takes ownership. Returns its
  /// index.
  int add_view(const QString& title, QWidget* view);
  /// Shows the view with this index (in the order added).
  void show_view(int index);
  /// Shows a view given by its widget (no change if it is not a view).
  void show_view_of(QWidget* view);
  int current_view() const;
  int view_count() const;
  QString view_title(int index) const;

  /// Opens an existing veq database (never creates one: a mistyped path
  /// should not leave an empty file behind) and lists its runs. A series
  /// started afterwards is stored in it.
  Result<void> open_database(const std::string& path);
  /// Creates (or opens) a database file and uses it.
  Result<void> create_database(const std::string& path);
  const std::string& database_path() const { return database_path_; }

  RunBrowser& browser() { return *browser_; }
  InstrumentsView& instruments() { return *instruments_; }
  SeriesView& series() { return *series_; }
  LiveRunView& live_run() { return *live_; }
  RackWorker& worker() { return *worker_; }

  /// Asked before the window closes during a series; true closes (the
  /// series is aborted, burettes stopped, the worker joined). Default: a
  /// question box.
  void set_close_question(std::function<bool()> ask) { ask_close_ = std::move(ask); }

  /// The settings store this window uses.
  std::unique_ptr<QSettings> settings() const;

 protected:
  void closeEvent(QCloseEvent* event) override;

 private:
  void choose_database();
  void new_database();
  void report(const QString& message);
  void about();
  void save_layout();
  void restore_layout();
  /// Every view lets go of the store (before it is replaced or closed).
  void detach_store();

  MainWindowOptions options_;
  std::unique_ptr<store::SqliteStore> store_;
  std::string database_path_;
  RackWorker* worker_ = nullptr;
  QListWidget* navigation_ = nullptr;
  QStackedWidget* stack_ = nullptr;
  QMenu* view_menu_ = nullptr;
  std::vector<QWidget*> views_;  ///< in the order added (owned by their scroll areas)
  RunBrowser* browser_ = nullptr;
  review::MethodEditorView* methods_ = nullptr;
  review::ResultsView* results_ = nullptr;
  review::SuppliesView* supplies_ = nullptr;
  InstrumentsView* instruments_ = nullptr;
  SeriesView* series_ = nullptr;
  LiveRunView* live_ = nullptr;
  std::function<bool()> ask_close_;
  bool closed_ = false;
};

}  // namespace veq::ui
