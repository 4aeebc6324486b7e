// veq-gui's window: opens an SQLite run store and shows it in a RunBrowser.
#pragma once

#include <memory>
#include <string>

#include <QtWidgets/QMainWindow>

#include "common/result.hpp"
#include "controller/store/sqlite_store.hpp"

namespace veq::ui {

class RunBrowser;

class MainWindow : public QMainWindow {
  Q_OBJECT

 public:
  explicit MainWindow(QWidget* parent = nullptr);
  ~MainWindow() override;

  /// Opens an existing veq database (never creates one: a mistyped path
  /// should not leave an empty file behind) and lists its runs.
  Result<void> open_database(const std::string& path);
  RunBrowser& browser() { return *browser_; }

 private:
  void choose_database();
  void report(const QString& message);

  std::unique_ptr<store::SqliteStore> store_;
  RunBrowser* browser_ = nullptr;
};

}  // namespace veq::ui
