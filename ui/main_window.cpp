#include "ui/main_window.hpp"

#include <filesystem>

#include <QtGui/QAction>
#include <QtGui/QKeySequence>
#include <QtWidgets/QFileDialog>
#include <QtWidgets/QMenuBar>
#include <QtWidgets/QMessageBox>
#include <QtWidgets/QStatusBar>

#include "ui/run_browser.hpp"

namespace veq::ui {

MainWindow::MainWindow(QWidget* parent) : QMainWindow(parent) {
  setWindowTitle("veq - titration runs");
  browser_ = new RunBrowser();
  setCentralWidget(browser_);
  connect(browser_, &RunBrowser::problem, this, &MainWindow::report);

  QMenu* file = menuBar()->addMenu("&File");
  QAction* open = file->addAction("&Open database...");
  open->setShortcut(QKeySequence::Open);
  connect(open, &QAction::triggered, this, &MainWindow::choose_database);
  QAction* reload = file->addAction("&Reload runs");
  reload->setShortcut(QKeySequence::Refresh);
  connect(reload, &QAction::triggered, this, [this] {
    if (auto r = browser_->reload(); !r)
      report(QString::fromStdString(r.error().describe()));
  });
  file->addSeparator();
  QAction* quit = file->addAction("&Quit");
  quit->setShortcut(QKeySequence::Quit);
  connect(quit, &QAction::triggered, this, &QWidget::close);

  statusBar()->showMessage("No database open");
}

MainWindow::~MainWindow() {
  // The browser reads through the store: let go of it before the store goes.
  (void)browser_->set_store(nullptr);
}

Result<void> MainWindow::open_database(const std::string& path) {
  std::error_code ec;
  if (!std::filesystem::is_regular_file(path, ec)) {
    return make_error(ErrorKind::not_found,
                      "no database file " + path + "; give the path of a veq SQLite file");
  }
  auto opened = store::SqliteStore::open(path);
  if (!opened)
    return opened.error();
  (void)browser_->set_store(nullptr);
  store_ = std::move(opened).value();
  if (auto listed = browser_->set_store(store_.get()); !listed)
    return listed.error();
  statusBar()->showMessage(QString::fromStdString(path) + " - " +
                           QString::number(browser_->run_count()) + " runs");
  return {};
}

void MainWindow::choose_database() {
  const QString path = QFileDialog::getOpenFileName(this, "Open a veq database", QString(),
                                                    "veq databases (*.sqlite *.db);;All files (*)");
  if (path.isEmpty())
    return;
  if (auto r = open_database(path.toStdString()); !r)
    report(QString::fromStdString(r.error().describe()));
}

void MainWindow::report(const QString& message) {
  statusBar()->showMessage(message);
  if (isVisible() && !testAttribute(Qt::WA_DontShowOnScreen))
    QMessageBox::warning(this, "veq", message);
}

}  // namespace veq::ui
