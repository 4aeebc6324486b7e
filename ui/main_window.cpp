#include "ui/main_window.hpp"

#include <filesystem>

#include <QtCore/QSettings>
#include <QtGui/QAction>
#include <QtGui/QCloseEvent>
#include <QtGui/QKeySequence>
#include <QtWidgets/QFileDialog>
#include <QtWidgets/QHBoxLayout>
#include <QtWidgets/QLabel>
#include <QtWidgets/QListWidget>
#include <QtWidgets/QMenuBar>
#include <QtWidgets/QMessageBox>
#include <QtWidgets/QScrollArea>
#include <QtWidgets/QStackedWidget>
#include <QtWidgets/QStatusBar>

#include "common/version.hpp"
#include "ui/instruments_view.hpp"
#include "ui/live_run_view.hpp"
#include "ui/rack_worker.hpp"
#include "ui/review/review_views.hpp"
#include "ui/run_browser.hpp"
#include "ui/series_view.hpp"

namespace veq::ui {

MainWindow::MainWindow(QWidget* parent, MainWindowOptions options)
    : QMainWindow(parent), options_(std::move(options)) {
  setWindowTitle("veq - titrations");
  worker_ = new RackWorker(this);

  navigation_ = new QListWidget();
  navigation_->setAccessibleName("views");
  stack_ = new QStackedWidget();
  auto* central = new QWidget();
  auto* row = new QHBoxLayout(central);
  row->setContentsMargins(4, 4, 4, 0);
  navigation_->setFixedWidth(160);
  row->addWidget(navigation_);
  row->addWidget(stack_, 1);
  setCentralWidget(central);
  connect(navigation_, &QListWidget::currentRowChanged, stack_, &QStackedWidget::setCurrentIndex);

  QMenu* file = menuBar()->addMenu("&File");
  QAction* open = file->addAction("&Open database...");
  open->setShortcut(QKeySequence::Open);
  connect(open, &QAction::triggered, this, &MainWindow::choose_database);
  QAction* create = file->addAction("&New database...");
  create->setShortcut(QKeySequence::New);
  connect(create, &QAction::triggered, this, &MainWindow::new_database);
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
  view_menu_ = menuBar()->addMenu("&View");
  QMenu* help = menuBar()->addMenu("&Help");
  QAction* about_action = help->addAction("&About veq");
  about_action->setShortcut(QKeySequence::HelpContents);
  connect(about_action, &QAction::triggered, this, &MainWindow::about);

  instruments_ = new InstrumentsView(*worker_);
  series_ = new SeriesView(*worker_, [this] { return database_path_; });
  live_ = new LiveRunView();
  live_->follow(*worker_);
  browser_ = new RunBrowser();
  add_view("Instruments", instruments_);
  add_view("Series", series_);
  add_view("Live run", live_);
  add_view("Stored runs", browser_);
  methods_ = new review::MethodEditorView();
  results_ = new review::ResultsView();
  supplies_ = new review::SuppliesView();
  add_view("Methods", methods_);
  add_view("Results and review", results_);
  add_view("Titrants, electrodes, burettes", supplies_);
  connect(methods_, &review::MethodEditorView::problem, this, &MainWindow::report);
  connect(results_, &review::ResultsView::problem, this, &MainWindow::report);
  connect(supplies_, &review::SuppliesView::problem, this, &MainWindow::report);

  connect(browser_, &RunBrowser::problem, this, &MainWindow::report);
  connect(instruments_, &InstrumentsView::problem, this, &MainWindow::report);
  connect(series_, &SeriesView::problem, this,
          [this](const QString& m) { statusBar()->showMessage(m); });
  connect(instruments_, &InstrumentsView::rack_ready, series_, &SeriesView::set_simulated);
  connect(worker_, &RackWorker::series_started, this, [this] { show_view(2); });
  connect(series_, &SeriesView::series_finished, this,
          [this](const QString& status, const QString& reason) {
            statusBar()->showMessage("Series " + status + ": " + reason);
            if (store_)
              (void)browser_->reload();
          });

  auto* caution = new QLabel(
      "Hazardous reagents: follow your laboratory's procedures (Help > "
      "About)");
  caution->setToolTip(QString::fromUtf8(kCautionText));
  statusBar()->addPermanentWidget(caution);
  statusBar()->showMessage("No database open");
  restore_layout();
}

MainWindow::~MainWindow() {
  // The worker stops before the views it talks to, and the browser lets go
  // of the store before the store goes.
  worker_->shutdown();
  detach_store();
}

void MainWindow::detach_store() {
  (void)browser_->set_store(nullptr);
  (void)methods_->set_store(nullptr);
  (void)results_->set_store(nullptr);
  (void)supplies_->set_store(nullptr);
}

int MainWindow::add_view(const QString& title, QWidget* view) {
  // In a scroll area, so that no view's width sets the window's smallest
  // size (the window fits a small screen; a wide table scrolls instead).
  auto* scroll = new QScrollArea();
  scroll->setWidget(view);
  scroll->setWidgetResizable(true);
  scroll->setFrameShape(QFrame::NoFrame);
  const int index = stack_->addWidget(scroll);
  views_.push_back(view);
  navigation_->addItem(title);
  QAction* show = view_menu_->addAction(title);
  if (index < 9)
    show->setShortcut(QKeySequence(Qt::CTRL | static_cast<Qt::Key>(Qt::Key_1 + index)));
  connect(show, &QAction::triggered, this, [this, index] { show_view(index); });
  if (index == 0)
    navigation_->setCurrentRow(0);
  return index;
}

void MainWindow::show_view(int index) {
  navigation_->setCurrentRow(index);
}

void MainWindow::show_view_of(QWidget* view) {
  for (std::size_t i = 0; i < views_.size(); ++i)
    if (views_[i] == view)
      show_view(static_cast<int>(i));
}

int MainWindow::current_view() const {
  return stack_->currentIndex();
}

int MainWindow::view_count() const {
  return stack_->count();
}

QString MainWindow::view_title(int index) const {
  const auto* item = navigation_->item(index);
  return item ? item->text() : QString();
}

std::unique_ptr<QSettings> MainWindow::settings() const {
  if (options_.settings_path.isEmpty())
    return std::make_unique<QSettings>("veq", "veq-gui");
  return std::make_unique<QSettings>(options_.settings_path, QSettings::IniFormat);
}

void MainWindow::save_layout() {
  auto s = settings();
  s->setValue("window/geometry", saveGeometry());
  s->setValue("window/state", saveState());
  s->setValue("window/view", current_view());
  instruments_->save(*s);
  s->sync();
}

void MainWindow::restore_layout() {
  auto s = settings();
  if (s->contains("window/geometry"))
    restoreGeometry(s->value("window/geometry").toByteArray());
  if (s->contains("window/state"))
    restoreState(s->value("window/state").toByteArray());
  const int view = s->value("window/view", 0).toInt();
  if (view >= 0 && view < view_count())
    show_view(view);
  instruments_->restore(*s);
}

Result<void> MainWindow::open_database(const std::string& path) {
  std::error_code ec;
  if (!std::filesystem::is_regular_file(path, ec)) {
    return make_error(ErrorKind::not_found,
                      "no database file " + path + "; give the path of a veq SQLite file");
  }
  return create_database(path);
}

Result<void> MainWindow::create_database(const std::string& path) {
  auto opened = store::SqliteStore::open(path);
  if (!opened)
    return opened.error();
  detach_store();
  store_ = std::move(opened).value();
  database_path_ = path;
  if (auto listed = browser_->set_store(store_.get()); !listed)
    return listed.error();
  for (auto attached : {methods_->set_store(store_.get()), results_->set_store(store_.get()),
                        supplies_->set_store(store_.get())}) {
    if (!attached)
      return attached.error();
  }
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

void MainWindow::new_database() {
  const QString path = QFileDialog::getSaveFileName(this, "New veq database", "veq.sqlite",
                                                    "veq databases (*.sqlite *.db);;All files (*)");
  if (path.isEmpty())
    return;
  if (auto r = create_database(path.toStdString()); !r)
    report(QString::fromStdString(r.error().describe()));
}

void MainWindow::about() {
  QMessageBox::about(
      this, "About veq",
      QString("<p><b>veq %1</b>: a controller and endpoint finder for automatic complexometric "
              "titrations.</p><p>%2</p><p>The desktop application's guide is docs/desktop.md.</p>")
          .arg(veq::kVersion, QString::fromUtf8(kCautionText).toHtmlEscaped()));
}

void MainWindow::report(const QString& message) {
  statusBar()->showMessage(message);
  if (isVisible() && !testAttribute(Qt::WA_DontShowOnScreen))
    QMessageBox::warning(this, "veq", message);
}

void MainWindow::closeEvent(QCloseEvent* event) {
  if (worker_->busy()) {
    const bool close =
        ask_close_ ? ask_close_()
                   : QMessageBox::question(
                         this, "veq",
                         "A series is running. Closing aborts it: the burettes are stopped and "
                         "every stored point stays. Close veq?") == QMessageBox::Yes;
    if (!close) {
      event->ignore();
      return;
    }
    statusBar()->showMessage("Aborting the series and stopping the burettes...");
  }
  save_layout();
  // Stop burettes and join the worker before Qt's event loop ends.
  worker_->shutdown();
  closed_ = true;
  event->accept();
}

}  // namespace veq::ui
