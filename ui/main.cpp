// veq-gui: the desktop application (instruments, series, the live run,
// stored runs). With --screenshot it renders one stored run offscreen to a
// PNG and exits (no display needed).
#include <cstdio>
#include <cstdlib>
#include <cstring>
#include <string>

#include <QtCore/QCommandLineParser>
#include <QtWidgets/QApplication>
#include <QtWidgets/QMessageBox>

#include "common/version.hpp"
#include "controller/store/sqlite_store.hpp"
#include "ui/main_window.hpp"
#include "ui/run_browser.hpp"
#include "ui/screenshot.hpp"

int main(int argc, char** argv) {
  // A screenshot needs no display: choose the offscreen platform before Qt
  // starts, unless the user chose one.
  for (int i = 1; i < argc; ++i) {
    if (std::strcmp(argv[i], "--screenshot") == 0 && std::getenv("QT_QPA_PLATFORM") == nullptr)
      setenv("QT_QPA_PLATFORM", "offscreen", 1);
  }
  QApplication app(argc, argv);
  QApplication::setApplicationName("veq-gui");
  QApplication::setApplicationVersion(veq::kVersion);

  QCommandLineParser parser;
  parser.setApplicationDescription(
      "Sets up the instruments, runs series of titrations and shows each curve as it grows;\n"
      "shows the titration runs stored in a veq SQLite file with their endpoints.");
  parser.addHelpOption();
  parser.addVersionOption();
  QCommandLineOption db_option("db", "veq database to open (default: $VEQ_DB, else ./veq.sqlite).",
                               "FILE");
  QCommandLineOption run_option("run", "run to show first (its number in the list).", "ID");
  QCommandLineOption screenshot_option(
      "screenshot", "render the run given by --run to this PNG file offscreen and exit.", "FILE");
  parser.addOption(db_option);
  parser.addOption(run_option);
  parser.addOption(screenshot_option);
  parser.process(app);

  const std::string db = parser.isSet(db_option) ? parser.value(db_option).toStdString()
                                                 : veq::store::default_database_path();
  std::int64_t run_id = 0;
  if (parser.isSet(run_option)) {
    bool ok = false;
    run_id = parser.value(run_option).toLongLong(&ok);
    if (!ok || run_id <= 0) {
      std::fprintf(stderr, "veq-gui: --run '%s' is not a run number (a whole number above 0)\n",
                   parser.value(run_option).toUtf8().constData());
      return 2;
    }
  }

  if (parser.isSet(screenshot_option)) {
    if (run_id == 0) {
      std::fprintf(stderr, "veq-gui: --screenshot needs --run ID (see `veq runs --db %s`)\n",
                   db.c_str());
      return 2;
    }
    const std::string png = parser.value(screenshot_option).toStdString();
    if (auto saved = veq::ui::save_run_screenshot(db, run_id, png); !saved) {
      std::fprintf(stderr, "veq-gui: %s\n", saved.error().describe().c_str());
      return 1;
    }
    std::printf("veq-gui: run %lld of %s saved to %s\n", static_cast<long long>(run_id), db.c_str(),
                png.c_str());
    return 0;
  }

  veq::ui::MainWindow window;
  window.resize(1280, 860);
  window.show();
  if (auto opened = window.open_database(db); !opened) {
    // A missing default database is the usual first start: the File menu
    // creates one. A database asked for by name must be there.
    if (parser.isSet(db_option) || std::getenv("VEQ_DB") != nullptr)
      QMessageBox::warning(&window, "veq", QString::fromStdString(opened.error().describe()));
  } else if (run_id > 0) {
    if (auto shown = window.browser().show_run(run_id); !shown)
      QMessageBox::warning(&window, "veq", QString::fromStdString(shown.error().describe()));
  }
  return QApplication::exec();
}
