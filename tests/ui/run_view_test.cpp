// The run view: plot data computed from a database filled by real titrations
// in virtual time, the widgets in-process, and veq-gui's offscreen screenshot.
#include <gtest/gtest.h>
#include <sys/wait.h>

#include <QtGui/QImage>
#include <QtWidgets/QApplication>
#include <QtWidgets/QLabel>
#include <algorithm>
#include <cmath>
#include <cstdlib>
#include <filesystem>
#include <set>
#include <string>

#include "controller/store/sqlite_store.hpp"
#include "controller/titration.hpp"
#include "simulator/bench.hpp"
#include "simulator/builtin_scenarios.hpp"
#include "ui/curve_chart.hpp"
#include "ui/main_window.hpp"
#include "ui/run_browser.hpp"
#include "ui/run_plot.hpp"
#include "ui/screenshot.hpp"

namespace veq::ui {
namespace {

namespace fs = std::filesystem;

QApplication& application() {
  if (qgetenv("QT_QPA_PLATFORM").isEmpty())
    qputenv("QT_QPA_PLATFORM", "offscreen");
  static int argc = 1;
  static char name[] = "veq_ui_tests";
  static char* argv[] = {name, nullptr};
  static QApplication app(argc, argv);
  return app;
}

/// A database with three runs of the built-in scenario, made once:
/// 1 completed; 2 failed when the electrode fell silent mid-run; 3 failed at
/// once (silent from the start, so no points).
class RunDatabase : public ::testing::Test {
 protected:
  static void SetUpTestSuite() {
    dir_ = fs::temp_directory_path() / ("veq-ui-test-" + std::to_string(::getpid()));
    fs::create_directories(dir_);
    db_ = (dir_ / "runs.sqlite").string();
    auto store = store::SqliteStore::open(db_);
    ASSERT_TRUE(store.has_value()) << store.error().message;
    auto scenario =
        simulator::parse_scenario(simulator::builtin_scenario("demo_calcium"), "demo_calcium");
    ASSERT_TRUE(scenario.has_value());
    const simulator::FaultPlan faults[] = {
        {simulator::FaultKind::none, 0.0},
        {simulator::FaultKind::silence, 200.0},
        {simulator::FaultKind::silence, 0.0},
    };
    const char* ids[] = {"pond-inlet", "pond-outlet", "cellar-tap"};
    for (int i = 0; i < 3; ++i) {
      simulator::Scenario s = *scenario;
      s.electrode_fault = faults[i];
      drivers::VirtualClock clock;
      simulator::SimulatedBench bench(s, clock);
      drivers::DeviceLink burette_link(bench.burette_line(), clock, "burette");
      drivers::DeviceLink sensor_link(bench.electrode_line(), clock, "electrode");
      drivers::BuretteClient burette(burette_link);
      drivers::PotentialSensorClient sensor(sensor_link);
      controller::Instruments instruments{burette, sensor, clock};
      controller::SampleDescription sample;
      sample.sample_id = ids[i];
      sample.sample_volume_ml = s.sample.volume_ml;
      sample.titrant_conc_mol_per_l = s.titrant.label_conc_mol_per_l;
      controller::TitrationMethod method;
      method.max_volume_ml = 20.0;
      const auto outcome = controller::run_titration(instruments, **store, sample, method);
      if (i == 0)
        truth_ml_ = bench.true_equivalence_reading_ml();
      run_ids_[i] = outcome.run_id;
    }
  }
  static void TearDownTestSuite() { fs::remove_all(dir_); }

  static std::unique_ptr<store::SqliteStore> open() {
    auto s = store::SqliteStore::open(db_);
    EXPECT_TRUE(s.has_value());
    return std::move(s).value();
  }

  static fs::path dir_;
  static std::string db_;
  static double truth_ml_;
  static std::int64_t run_ids_[3];
};
fs::path RunDatabase::dir_;
std::string RunDatabase::db_;
double RunDatabase::truth_ml_ = 0.0;
std::int64_t RunDatabase::run_ids_[3] = {0, 0, 0};

TEST_F(RunDatabase, CompletedRunPlotShowsCurveDerivativeAndStoredEndpoint) {
  auto store = open();
  auto plot = build_run_plot(*store, run_ids_[0]);
  ASSERT_TRUE(plot.has_value()) << plot.error().message;
  auto points = store->load_points(run_ids_[0]);
  auto evaluations = store->load_evaluations(run_ids_[0]);
  ASSERT_TRUE(points && evaluations);
  ASSERT_EQ(plot->curve.x.size(), points->size());
  EXPECT_EQ(plot->curve.y.front(), points->front().signal);
  EXPECT_EQ(plot->curve.y_title, "potential (mV)");
  // One derivative value per point (the volumes are all distinct).
  ASSERT_EQ(plot->derivative.x.size(), points->size());
  EXPECT_EQ(plot->derivative.y_title, "mV/mL");

  // The marker is the stored endpoint, and that endpoint is within 0.2 % of
  // the simulator's hidden equivalence volume (the accuracy issue 2 asks of
  // a titration with 0.1 mV noise and 0.05 mL steps).
  ASSERT_EQ(plot->endpoints.size(), 1u);
  ASSERT_FALSE(evaluations->empty());
  EXPECT_EQ(plot->endpoints[0].volume_ml, evaluations->back().endpoints.at(0).volume_ml);
  EXPECT_NEAR(plot->endpoints[0].volume_ml, truth_ml_, 0.002 * truth_ml_);
  EXPECT_NE(plot->note.find("stored evaluation"), std::string::npos) << plot->note;

  // The steepest point of the drawn derivative lies within one 0.05 mL step
  // of the endpoint: the two charts tell the same story.
  const auto steepest =
      std::max_element(plot->derivative.y.begin(), plot->derivative.y.end(),
                       [](double a, double b) { return std::abs(a) < std::abs(b); });
  const double steepest_ml =
      plot->derivative.x[static_cast<std::size_t>(steepest - plot->derivative.y.begin())];
  EXPECT_NEAR(steepest_ml, plot->endpoints[0].volume_ml, 0.05);
  EXPECT_NE(plot->summary.find("completed"), std::string::npos) << plot->summary;
  EXPECT_NE(plot->summary.find("mmol/L"), std::string::npos) << plot->summary;
}

TEST_F(RunDatabase, FailedRunKeepsItsPointsAndSaysWhy) {
  auto store = open();
  auto plot = build_run_plot(*store, run_ids_[1]);
  ASSERT_TRUE(plot.has_value()) << plot.error().message;
  EXPECT_GT(plot->curve.x.size(), 10u);  // 200 s of readings before the silence
  EXPECT_FALSE(plot->derivative.x.empty());
  EXPECT_TRUE(plot->endpoints.empty());  // the break lies far beyond where it stopped
  EXPECT_NE(plot->summary.find("failed"), std::string::npos) << plot->summary;
  EXPECT_NE(plot->summary.find("timeout"), std::string::npos) << plot->summary;
  EXPECT_NE(plot->note.find("no endpoint found"), std::string::npos) << plot->note;

  auto empty = build_run_plot(*store, run_ids_[2]);
  ASSERT_TRUE(empty.has_value()) << empty.error().message;
  EXPECT_TRUE(empty->curve.x.empty());
  EXPECT_TRUE(empty->derivative.x.empty());
  EXPECT_NE(empty->note.find("no derivative"), std::string::npos) << empty->note;
}

TEST_F(RunDatabase, MissingRunIsNotFound) {
  auto store = open();
  auto plot = build_run_plot(*store, 999);
  ASSERT_FALSE(plot.has_value());
  EXPECT_EQ(plot.error().kind, ErrorKind::not_found);
  EXPECT_NE(plot.error().message.find("no run 999"), std::string::npos);
}

TEST_F(RunDatabase, BrowserListsRunsShowsOneAndCarriesTheCaution) {
  application();
  MainWindow window;
  ASSERT_TRUE(window.open_database(db_).has_value());
  RunBrowser& browser = window.browser();
  EXPECT_EQ(browser.run_count(), 3);
  ASSERT_TRUE(browser.show_run(run_ids_[1]).has_value());
  EXPECT_EQ(browser.current_run(), run_ids_[1]);
  auto missing = browser.show_run(999);
  ASSERT_FALSE(missing.has_value());
  EXPECT_EQ(missing.error().kind, ErrorKind::not_found);
  EXPECT_EQ(browser.current_run(), run_ids_[1]);  // the view stays on the last good run

  bool caution_shown = false;
  for (const QLabel* label : window.findChildren<QLabel*>())
    caution_shown = caution_shown || label->text() == QString::fromUtf8(kCautionText);
  EXPECT_TRUE(caution_shown);
  const std::string caution = kCautionText;
  EXPECT_NE(caution.find("ammonia"), std::string::npos);
  EXPECT_NE(caution.find("cyanide"), std::string::npos);
}

TEST_F(RunDatabase, MissingDatabaseIsRefusedAndNotCreated) {
  application();
  MainWindow window;
  const std::string path = (dir_ / "no-such.sqlite").string();
  auto opened = window.open_database(path);
  ASSERT_FALSE(opened.has_value());
  EXPECT_EQ(opened.error().kind, ErrorKind::not_found);
  EXPECT_FALSE(fs::exists(path));
}

/// Pixels near a colour (each channel within 40 of it).
int count_near(const QImage& image, QRgb target) {
  int n = 0;
  for (int y = 0; y < image.height(); ++y) {
    for (int x = 0; x < image.width(); ++x) {
      const QRgb p = image.pixel(x, y);
      if (std::abs(qRed(p) - qRed(target)) < 40 && std::abs(qGreen(p) - qGreen(target)) < 40 &&
          std::abs(qBlue(p) - qBlue(target)) < 40)
        ++n;
    }
  }
  return n;
}

int run_gui(const std::string& arguments) {
  const std::string command = "QT_QPA_PLATFORM=offscreen " + std::string(VEQ_BINARY_DIR) +
                              "/bin/veq-gui " + arguments + " > /dev/null 2>&1";
  const int status = std::system(command.c_str());
  return WIFEXITED(status) ? WEXITSTATUS(status) : -1;
}

TEST_F(RunDatabase, ScreenshotFromTheExecutableIsAFullNonBlankPicture) {
  const std::string png = (dir_ / "run.png").string();
  ASSERT_EQ(
      run_gui("--screenshot " + png + " --db " + db_ + " --run " + std::to_string(run_ids_[0])), 0);
  QImage image(QString::fromStdString(png));
  ASSERT_FALSE(image.isNull()) << "not a readable PNG: " << png;
  const ScreenshotSize expected;
  EXPECT_EQ(image.width(), expected.width_px);
  EXPECT_EQ(image.height(), expected.height_px);
  std::set<QRgb> colours;
  for (int y = 0; y < image.height(); y += 2)
    for (int x = 0; x < image.width(); x += 2)
      colours.insert(image.pixel(x, y));
  // A blank or single-colour window has a handful; text, antialiased curves
  // and the two charts give hundreds.
  EXPECT_GT(colours.size(), 200u);
  // The endpoint is marked: dashed lines across both charts in the marker colour.
  EXPECT_GT(count_near(image, CurveChart::kMarkerRgb), 300);
  // The curve is drawn (line and point markers).
  EXPECT_GT(count_near(image, 0x1565C0), 500);
}

TEST_F(RunDatabase, ScreenshotOfAMissingRunFailsWithoutAFile) {
  const std::string png = (dir_ / "missing.png").string();
  EXPECT_EQ(run_gui("--screenshot " + png + " --db " + db_ + " --run 999"), 1);
  EXPECT_FALSE(fs::exists(png));
  EXPECT_EQ(run_gui("--screenshot " + png + " --db " + db_), 2);  // no --run
}

TEST_F(RunDatabase, ScreenshotThroughTheLibraryMatchesTheRequestedSize) {
  application();
  const std::string png = (dir_ / "library.png").string();
  auto saved = save_run_screenshot(db_, run_ids_[1], png, ScreenshotSize{900, 600});
  ASSERT_TRUE(saved.has_value()) << saved.error().message;
  QImage image(QString::fromStdString(png));
  ASSERT_FALSE(image.isNull());
  EXPECT_EQ(image.width(), 900);
  EXPECT_EQ(image.height(), 600);
}

}  // namespace
}  // namespace veq::ui
