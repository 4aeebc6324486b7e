// The desktop application's running half: the queue table's rules, the
// Instruments, Series and Live run views driven as a technician drives
// them, a whole series on the simulated rack in virtual time, closing the
// window during a series, the remembered layout, and the screenshots for
// docs/desktop.md.
#include <gtest/gtest.h>
#include <unistd.h>

#include <QtCore/QElapsedTimer>
#include <QtCore/QSettings>
#include <QtGui/QClipboard>
#include <QtGui/QImage>
#include <QtTest/QTest>
#include <QtWidgets/QApplication>
#include <QtWidgets/QTableWidget>
#include <chrono>
#include <cmath>
#include <filesystem>
#include <functional>
#include <string>

#include "controller/series/series_file.hpp"
#include "controller/store/sqlite_store.hpp"
#include "ui/instruments_view.hpp"
#include "ui/live_run_view.hpp"
#include "ui/main_window.hpp"
#include "ui/queue_table.hpp"
#include "ui/rack.hpp"
#include "ui/rack_worker.hpp"
#include "ui/series_view.hpp"

namespace veq::ui {
namespace {

namespace fs = std::filesystem;

QApplication& application() {
  if (qgetenv("QT_QPA_PLATFORM").isEmpty())
    qputenv("QT_QPA_PLATFORM", "offscreen");
  static int argc = 1;
  static char name[] = "veq_desktop_tests";
  static char* argv[] = {name, nullptr};
  // Never destroyed: QTest's input devices belong to the application, and
  // Qt 6.4 crashes deleting them from a static destructor at exit.
  static QApplication* app = new QApplication(argc, argv);
  return *app;
}

/// Processes events until `done` holds or `timeout_ms` of wall time pass.
bool wait_until(const std::function<bool()>& done, int timeout_ms = 20000) {
  QElapsedTimer timer;
  timer.start();
  while (!done()) {
    if (timer.elapsed() > timeout_ms)
      return false;
    QCoreApplication::processEvents(QEventLoop::AllEvents, 20);
  }
  return true;
}

class Desktop : public ::testing::Test {
 protected:
  void SetUp() override {
    application();
    // In memory when the system offers it: a series commits every point
    // (one fsync each), and on a busy disk that, not the window, would set
    // the tests' time (0.35 s against 5 s for the demo rack, measured).
    std::error_code ec;
    const fs::path base =
        fs::is_directory("/dev/shm", ec) ? fs::path("/dev/shm") : fs::temp_directory_path();
    dir_ = base / ("veq-desktop-test-" + std::to_string(::getpid()) + "-" +
                   ::testing::UnitTest::GetInstance()->current_test_info()->name());
    fs::create_directories(dir_);
  }
  void TearDown() override { fs::remove_all(dir_); }

  MainWindowOptions options() const {
    return MainWindowOptions{QString::fromStdString((dir_ / "settings.ini").string())};
  }
  std::string db() const { return (dir_ / "veq.sqlite").string(); }

  /// Connects the window to the simulated rack and waits for every answer.
  static void connect_simulated(MainWindow& window) {
    window.instruments().use_simulated();
    window.instruments().apply_and_test();
    ASSERT_TRUE(wait_until([&] {
      return window.instruments().role_status(BenchRole::balance).startsWith("answers");
    })) << window.instruments().role_status(BenchRole::balance).toStdString();
  }

  /// The demo rack's preparation entries (conditioning, calibration,
  /// burette check, blank, titer) from its series file; the samples are
  /// pasted by the tests as a technician pastes them from a spreadsheet.
  static std::string demo_preparation() {
    std::string text = demo_series_text();
    text = text.substr(0, text.find("[sample]"));
    const auto every = text.find("check standard every = 2\n");
    if (every != std::string::npos)
      text.erase(every, std::string("check standard every = 2\n").size());
    return text;
  }

  fs::path dir_;
};

// ---- the queue table's rules, without widgets ----

TEST(QueueTable, PastedRowsBecomeEntriesWithTheirUnits) {
  const std::string text =
      "Sample ID\tKind\tMethod\tReplicates\tSize\tUnit\tDilution factor\tDensity (g/mL)\t"
      "Positions\n"
      "well 3\tsample\ttap water hardness\t2\t50\tmL\t\t\t11, 12\r\n"
      "sludge 7\tsample\tsludge digest\t2\t0.2503, 0.2511\tg\t10\t1.02\t13-14\n"
      "\n"
      "river\t\ttap water hardness\t\t\tg from balance\t\t\t15 16\n";
  auto rows = parse_pasted_rows(text, 1);
  ASSERT_TRUE(rows.has_value()) << rows.error().message;
  ASSERT_EQ(rows->size(), 3u);
  auto well = row_to_entry((*rows)[0], 1);
  ASSERT_TRUE(well.has_value()) << well.error().message;
  EXPECT_EQ(well->id, "well 3");
  EXPECT_EQ(well->replicates, 2);
  ASSERT_EQ(well->portions.size(), 1u);
  EXPECT_EQ(well->portions[0].aliquot_ml, 50.0);
  EXPECT_EQ(well->positions, (std::vector<int>{11, 12}));
  auto sludge = row_to_entry((*rows)[1], 2);
  ASSERT_TRUE(sludge.has_value()) << sludge.error().message;
  ASSERT_EQ(sludge->portions.size(), 2u);
  EXPECT_EQ(sludge->portions[1].mass_g, 0.2511);
  EXPECT_EQ(sludge->dilution_factor, 10.0);
  EXPECT_EQ(sludge->density_g_per_ml, 1.02);
  EXPECT_EQ(sludge->positions, (std::vector<int>{13, 14}));
  auto river = row_to_entry((*rows)[2], 3);
  ASSERT_TRUE(river.has_value()) << river.error().message;
  EXPECT_EQ(river->kind, series::EntryKind::sample);  // an empty kind is a sample
  ASSERT_EQ(river->portions.size(), 2u);              // one to weigh per position
  EXPECT_TRUE(river->portions[0].from_balance);

  // The queue as a series passes the controller's own checks and reads back.
  auto s = rows_to_series(*rows, "pasted", 0);
  ASSERT_TRUE(s.has_value()) << s.error().message;
  auto again = series::parse_series(series::write_series(*s));
  ASSERT_TRUE(again.has_value()) << again.error().message;
  EXPECT_EQ(series::write_series(*again), series::write_series(*s));
}

TEST(QueueTable, MalformedPastesNameTheRowAndTheColumn) {
  // Third line of the paste lands on table row 7 (pasted below row 4).
  auto bad = parse_pasted_rows(
      "a\tsample\tm\t2\t50\tmL\t\t\t1,2\nb\tsample\tm\t2\t50\tmL\t\t\t3,4\n"
      "c\tsample\tm\ttwo\t50\tmL\t\t\t5,6\n",
      5);
  ASSERT_FALSE(bad.has_value());
  EXPECT_EQ(bad.error().kind, ErrorKind::invalid_input);
  EXPECT_NE(bad.error().message.find("row 7, column Replicates: 'two'"), std::string::npos)
      << bad.error().message;

  struct Case {
    const char* line;
    const char* expected;
  };
  const Case cases[] = {
      {"x\tsample\tm\t3\t2,5\tg\t\t\t1,2,3", "row 1, column Size: 2 sizes for 3 positions"},
      {"x\tsample\tm\t2\t0,25\tg\t\t\t1,2", "row 1, column Size: '0' is not a mass"},
      {"x\tsample\tm\t2\tfifty\tmL\t\t\t1,2", "row 1, column Size: 'fifty'"},
      {"x\tsample\tm\t2\t50\tlitres\t\t\t1,2", "row 1, column Unit: 'litres'"},
      {"x\tsample\tm\t3\t50\tmL\t\t\t1,2", "row 1, column Positions: 2 positions for 3"},
      {"x\tsample\tm\t2\t50\tmL\t0.5\t\t1,2", "row 1, column Dilution factor"},
      {"x\tsample\tm\t2\t50\tmL\t\t\t", "row 1, column Positions: empty"},
      {"\tsample\tm\t2\t50\tmL\t\t\t1,2", "row 1, column Sample ID: empty"},
      {"x\ttiter\tm\t2\t50\tmL\t\t\t1,2", "row 1, column Kind: a titer entry needs details"},
      {"x\tsample\tm\t2\t50\tmL\t\t\t1,2\textra", "row 1, column 10: 'extra' lies beyond"},
      {"x\tblank\tm\t2\t0.2\tg\t\t\t1,2", "row 1, column Unit: a blank takes aliquots"},
  };
  for (const auto& c : cases) {
    auto r = parse_pasted_rows(c.line, 1);
    ASSERT_FALSE(r.has_value()) << c.line;
    EXPECT_NE(r.error().message.find(c.expected), std::string::npos)
        << "paste: " << c.line << "\nmessage: " << r.error().message;
  }
  // A decimal comma is caught only when the halves do not pass as sizes:
  // 2,5 on two positions is two sizes, 2 g and 5 g (documented in
  // docs/desktop.md).
  EXPECT_TRUE(parse_pasted_rows("x\tsample\tm\t2\t2,5\tg\t\t\t1,2", 1).has_value());

  // An empty row in the table is skipped but keeps the numbering.
  auto three =
      parse_pasted_rows("a\tsample\tm\t1\t50\tmL\t\t\t1\nb\tsample\tm\t1\t50\tmL\t\t\t2", 1);
  ASSERT_TRUE(three.has_value());
  three->insert(three->begin() + 1, QueueRow{});
  (*three)[2].cell(QueueColumn::positions) = "x";
  auto numbered = rows_to_series(*three, "gap", 0);
  ASSERT_FALSE(numbered.has_value());
  EXPECT_EQ(numbered.error().message.rfind("row 3, column Positions: 'x'", 0), 0u)
      << numbered.error().message;

  // A position that two rows share is refused with both rows named.
  auto rows =
      parse_pasted_rows("a\tsample\tm\t1\t50\tmL\t\t\t1\nb\tsample\tm\t1\t50\tmL\t\t\t1", 1);
  ASSERT_TRUE(rows.has_value());
  auto s = rows_to_series(*rows, "twice", 0);
  ASSERT_FALSE(s.has_value());
  EXPECT_NE(s.error().message.find("row 2, column Positions: position 1 is already used by row 1"),
            std::string::npos)
      << s.error().message;
}

TEST(QueueTable, SeriesFileEntriesKeepWhatTheTableDoesNotShow) {
  auto demo = series::parse_series(demo_series_text());
  ASSERT_TRUE(demo.has_value()) << demo.error().message;
  std::vector<QueueRow> rows;
  for (const auto& e : demo->entries)
    rows.push_back(entry_to_row(e));
  auto back = rows_to_series(rows, demo->name, demo->check_standard_every);
  ASSERT_TRUE(back.has_value()) << back.error().message;
  // Every entry, titer masses, calibration standards and the check
  // standard's expected value included, comes back as it was.
  ASSERT_EQ(back->entries.size(), demo->entries.size());
  for (std::size_t i = 0; i < demo->entries.size(); ++i)
    EXPECT_EQ(back->entries[i], demo->entries[i]) << "entry " << i;
}

// ---- the views ----

TEST_F(Desktop, SeriesViewQueuesPastedRowsAndRefusesAMalformedPaste) {
  MainWindow window(nullptr, options());
  SeriesView& view = window.series();
  ASSERT_TRUE(
      view.paste_text("well 3\tsample\ttap water\t2\t50\tmL\t\t\t11, 12\n"
                      "well 4\tsample\ttap water\t2\t50\tmL\t\t\t13, 14\n"));
  EXPECT_EQ(view.rows().size(), 2u);
  EXPECT_EQ(view.status_of(0), "waiting");

  // Through the clipboard and the keyboard, as from a spreadsheet.
  QGuiApplication::clipboard()->setText("well 5\tsample\ttap water\t1\t25\tmL\t2\t\t15\n");
  auto* table = view.findChild<QTableWidget*>();  // the queue, not a review table
  ASSERT_NE(table, nullptr);
  window.show();
  QApplication::setActiveWindow(&window);
  ASSERT_TRUE(QTest::qWaitForWindowActive(&window));
  window.show_view_of(&view);
  table->setFocus();
  table->setCurrentCell(1, 0);
  QTest::keySequence(table, QKeySequence::Paste);
  ASSERT_EQ(view.rows().size(), 3u) << view.message().toStdString();
  EXPECT_EQ(view.rows()[2].cell(QueueColumn::sample_id), "well 5");
  EXPECT_EQ(view.rows()[2].cell(QueueColumn::dilution), "2");

  // A bad third line: nothing is pasted and the message names row 6 (the
  // paste goes below row 3) and the column.
  table->setCurrentCell(2, 0);
  EXPECT_FALSE(
      view.paste_text("a\tsample\tm\t1\t50\tmL\t\t\t20\nb\tsample\tm\t1\t50\tmL\t\t\t21\n"
                      "c\tsample\tm\t1\t50 mL\tmL\t\t\t22\n"));
  EXPECT_EQ(view.rows().size(), 3u);
  EXPECT_TRUE(view.message().contains("row 6, column Size: 'mL' is not a volume in mL"))
      << view.message().toStdString();

  // Starting without a database says what to do.
  EXPECT_FALSE(view.start());
  EXPECT_TRUE(view.message().contains("no database is open")) << view.message().toStdString();
  window.hide();
}

TEST_F(Desktop, InstrumentsViewTestsConnectionsAndReadsTheElectrode) {
  MainWindow window(nullptr, options());
  InstrumentsView& view = window.instruments();

  // Simulated and real devices cannot be mixed; the message names the role.
  RackSettings mixed = RackSettings::all_simulated();
  mixed[BenchRole::balance].connection = "tcp:localhost:1";
  auto refused = open_rack(mixed);
  ASSERT_FALSE(refused.has_value());
  EXPECT_NE(refused.error().message.find("balance: simulated instruments"), std::string::npos);
  // A malformed connection string names the role and the string's fault.
  RackSettings bad;
  bad[BenchRole::burette].connection = "serial:/dev/ttyUSB0?baud=fast";
  auto wrong = open_rack(bad);
  ASSERT_FALSE(wrong.has_value());
  EXPECT_EQ(wrong.error().message.rfind("burette 1: ", 0), 0u) << wrong.error().message;

  ASSERT_NO_FATAL_FAILURE(connect_simulated(window));
  for (int i = 0; i < kBenchRoleCount; ++i) {
    EXPECT_TRUE(view.role_status(static_cast<BenchRole>(i)).startsWith("answers: veq virtual"))
        << bench_role_name(static_cast<BenchRole>(i)) << ": "
        << view.role_status(static_cast<BenchRole>(i)).toStdString();
  }
  EXPECT_TRUE(view.simulated());

  // Live readings: the simulated calcium electrode in a vessel not yet
  // lowered into reads a potential in mV with the pH it reports.
  view.set_live_readings(true);
  ASSERT_TRUE(wait_until([&] { return !view.reading_text().startsWith("- mV"); }, 5000))
      << view.reading_text().toStdString();
  view.set_live_readings(false);
  EXPECT_FALSE(view.reading_text().startsWith("- mV")) << view.reading_text().toStdString();
}

TEST_F(Desktop, LiveRunViewBatchesChartUpdates) {
  LiveRunView view;
  view.resize(900, 600);
  view.show();
  view.begin_run("batch check");
  // A thousand points in one go, as a virtual-time run delivers them: the
  // charts are redrawn by the timer, not once per point.
  for (int i = 0; i < 1000; ++i) {
    const double v = 0.02 * i;
    view.add_point(i, v, 100.0 - 60.0 * std::tanh((v - 10.0) * 4.0), 0.2, i);
  }
  EXPECT_EQ(view.point_count(), 1000);
  EXPECT_EQ(view.drawn_point_count(), 0);
  QElapsedTimer timer;
  timer.start();
  ASSERT_TRUE(wait_until([&] { return view.drawn_point_count() == 1000; }, 3000));
  EXPECT_LE(view.redraw_count(), 2);
  // Quiet for a while: no redraw without new points.
  QTest::qWait(3 * LiveRunView::kRedrawIntervalMs);
  EXPECT_LE(view.redraw_count(), 2);
  EXPECT_EQ(view.volume_text(), "19.980 mL");
  view.show_endpoints({10.0});
  view.set_state("titrating", "completed", "endpoint found");
  EXPECT_EQ(view.state_text(), "completed");
}

TEST_F(Desktop, SimulatedSeriesRunsEndToEndFromTheSeriesView) {
  MainWindow window(nullptr, options());
  window.resize(1280, 860);
  ASSERT_TRUE(window.create_database(db()).has_value());
  ASSERT_NO_FATAL_FAILURE(connect_simulated(window));
  SeriesView& view = window.series();
  ASSERT_TRUE(view.load_series_text(demo_preparation(), "demo preparation"));
  const int prepared = static_cast<int>(view.rows().size());
  ASSERT_EQ(prepared, 5);
  // Two samples of the demo rack pasted from a spreadsheet (the rack's
  // positions 11-16 hold them).
  ASSERT_TRUE(view.paste_text(
      "Ferncombe spring\tsample\tcalcium in drinking water\t2\t50\tmL\t\t\t11-13\n"
      "Holloway borehole\tsample\tcalcium in drinking water\t2\t50\tmL\t\t\t14, 15, 16\n"))
      << view.message().toStdString();

  int points_seen = 0;
  QObject::connect(&window.worker(), &RackWorker::point_measured, &window, [&] { ++points_seen; });
  ASSERT_TRUE(view.start()) << view.message().toStdString();
  ASSERT_TRUE(wait_until([&] { return !view.running(); })) << view.message().toStdString();
  const auto& outcome = window.worker().last_outcome();
  EXPECT_EQ(outcome.status, store::SeriesStatus::completed) << outcome.reason;
  EXPECT_TRUE(outcome.burettes_stopped);

  // The view shows every entry's status and the samples' results.
  for (int r = 0; r < prepared + 2; ++r)
    EXPECT_EQ(view.status_of(r), "done")
        << "row " << r + 1 << ": " << view.result_of(r).toStdString();
  EXPECT_TRUE(view.result_of(prepared).contains("mmol/L"))
      << view.result_of(prepared).toStdString();
  EXPECT_EQ(view.flagged_count(), 0);

  // What is stored: one series, seven entries, two or three determinations
  // for each sample.
  auto store = store::SqliteStore::open(db());
  ASSERT_TRUE(store.has_value());
  auto all = (*store)->list_series();
  ASSERT_TRUE(all.has_value());
  ASSERT_EQ(all->size(), 1u);
  auto entries = (*store)->load_entries(all->front().id);
  ASSERT_TRUE(entries.has_value());
  EXPECT_EQ(entries->size(), static_cast<std::size_t>(prepared + 2));

  // The Ferncombe spring's result against the simulator's hidden truth:
  // 1.62 mmol/L of calcium in the rack's vessels (demo_data.hpp). 0.5 %
  // is our tolerance for a titer- and blank-corrected series result.
  Rack* rack = window.worker().rack();
  ASSERT_NE(rack, nullptr);
  ASSERT_NE(rack->bench(), nullptr);
  double truth_mol = 0.0;
  for (const auto& [metal, mol] : rack->bench()->position_truths(11).metals_mol)
    truth_mol += mol;
  const double truth_mmol_per_l = truth_mol / 0.050 * 1000.0;
  EXPECT_NEAR(truth_mmol_per_l, 1.62, 1e-6);
  bool found = false;
  for (const auto& e : outcome.entries) {
    if (e.label != "Ferncombe spring")
      continue;
    found = true;
    ASSERT_TRUE(e.mean.has_value());
    EXPECT_EQ(e.unit, "mmol/L");
    EXPECT_NEAR(*e.mean, truth_mmol_per_l, 0.005 * truth_mmol_per_l);
  }
  EXPECT_TRUE(found);

  // The live view followed the runs: every stored point reached the
  // window, and the view holds the last run's points, drawn.
  LiveRunView& live = window.live_run();
  auto runs = (*store)->list_runs();
  ASSERT_TRUE(runs.has_value());
  ASSERT_FALSE(runs->empty());
  std::size_t stored_points = 0;
  std::size_t last_run_points = 0;
  for (const auto& run : *runs) {
    auto points = (*store)->load_points(run.id);
    ASSERT_TRUE(points.has_value());
    stored_points += points->size();
    if (run.id == runs->back().id)
      last_run_points = points->size();
  }
  EXPECT_GT(points_seen, 100);
  EXPECT_EQ(static_cast<std::size_t>(points_seen), stored_points);
  EXPECT_EQ(static_cast<std::size_t>(live.point_count()), last_run_points);
  ASSERT_TRUE(wait_until([&] { return live.drawn_point_count() == live.point_count(); }, 2000));
  EXPECT_EQ(window.view_title(window.current_view()), "Live run");
}

TEST_F(Desktop, ClosingDuringASeriesAbortsStopsTheBuretteAndJoins) {
  auto window = std::make_unique<MainWindow>(nullptr, options());
  ASSERT_TRUE(window->create_database(db()).has_value());
  ASSERT_NO_FATAL_FAILURE(connect_simulated(*window));
  window->series().load_demo_series();
  bool asked = false;
  window->set_close_question([&] {
    asked = true;
    return true;
  });
  bool busy_at_close = false;
  bool closed = false;
  int points = 0;
  QObject::connect(&window->worker(), &RackWorker::point_measured, window.get(), [&] {
    if (++points == 20 && !closed) {
      busy_at_close = window->worker().busy();
      closed = window->close();
    }
  });
  ASSERT_TRUE(window->series().start());
  ASSERT_TRUE(wait_until([&] { return closed; })) << window->series().message().toStdString();
  EXPECT_TRUE(asked);
  EXPECT_TRUE(busy_at_close);
  // The worker is joined: nothing runs, and the burettes stand still.
  EXPECT_FALSE(window->worker().busy());
  Rack* rack = window->worker().rack();
  ASSERT_NE(rack, nullptr);
  EXPECT_FALSE(rack->bench()->burette().moving());
  EXPECT_FALSE(rack->bench()->second_burette().moving());
  EXPECT_EQ(window->worker().last_outcome().status, store::SeriesStatus::aborted)
      << window->worker().last_outcome().reason;
  EXPECT_TRUE(window->worker().last_outcome().burettes_stopped);
  // The series is stored as aborted, with the entries it reached.
  auto store = store::SqliteStore::open(db());
  ASSERT_TRUE(store.has_value());
  auto all = (*store)->list_series();
  ASSERT_TRUE(all.has_value());
  ASSERT_EQ(all->size(), 1u);
  EXPECT_EQ(all->front().status, store::SeriesStatus::aborted);
  window.reset();
}

TEST_F(Desktop, PauseFinishesTheVesselThenWaitsUntilResumed) {
  MainWindow window(nullptr, options());
  ASSERT_TRUE(window.create_database(db()).has_value());
  ASSERT_NO_FATAL_FAILURE(connect_simulated(window));
  SeriesView& view = window.series();
  view.load_demo_series();
  int points = 0;
  int waits = 0;
  QObject::connect(&window.worker(), &RackWorker::point_measured, &window, [&] {
    if (++points == 5)
      view.set_paused(true);
  });
  QObject::connect(&window.worker(), &RackWorker::paused_between_vessels, &window,
                   [&](bool waiting) { waits += waiting ? 1 : 0; });
  ASSERT_TRUE(view.start());
  ASSERT_TRUE(wait_until([&] { return waits == 1; })) << view.message().toStdString();
  EXPECT_TRUE(view.message().startsWith("Paused: the last vessel is finished"))
      << view.message().toStdString();
  // Waiting: no new point for a while, and the series is still on.
  QTest::qWait(50);
  const int held = points;
  QTest::qWait(300);
  EXPECT_EQ(points, held);
  EXPECT_TRUE(window.worker().busy());
  EXPECT_TRUE(view.running());
  view.set_paused(false);
  ASSERT_TRUE(wait_until([&] { return !view.running(); })) << view.message().toStdString();
  EXPECT_EQ(window.worker().last_outcome().status, store::SeriesStatus::completed)
      << window.worker().last_outcome().reason;
  EXPECT_GT(points, held);
}

TEST_F(Desktop, MassesAreReadFromTheSimulatedBalanceIntoTheQueue) {
  MainWindow window(nullptr, options());
  ASSERT_NO_FATAL_FAILURE(connect_simulated(window));
  SeriesView& view = window.series();
  ASSERT_TRUE(view.paste_text(
      "river\tsample\tcalcium in drinking water\t2\t\tg from balance\t\t\t11, 12\n"));
  ASSERT_TRUE(view.read_masses()) << view.message().toStdString();
  // Two portions, two instructions each (empty vessel, then the portion).
  int instructions = 0;
  ASSERT_TRUE(wait_until([&] {
    if (!view.instruction().isEmpty() && view.instruction().endsWith("Then press Done.")) {
      ++instructions;
      view.confirm_instruction();
    }
    return !view.running();
  })) << view.message().toStdString();
  EXPECT_EQ(instructions, 4);
  EXPECT_TRUE(view.message().startsWith("2 portions weighed, 0 without a mass"))
      << view.message().toStdString();
  // The simulated hands put 0.2400 g and 0.2437 g on the pan (rack_worker.cpp);
  // the balance reads them to within its 0.1 mg readability plus a little
  // settling (1 mg allowed).
  const auto rows = view.rows();
  ASSERT_EQ(rows.size(), 1u);
  auto entry = row_to_entry(rows[0], 1);
  ASSERT_TRUE(entry.has_value()) << entry.error().message;
  ASSERT_EQ(entry->portions.size(), 2u);
  EXPECT_NEAR(entry->portions[0].mass_g, 0.2400, 0.001);
  EXPECT_NEAR(entry->portions[1].mass_g, 0.2437, 0.001);
  EXPECT_TRUE(entry->portions[0].from_balance);
}

TEST_F(Desktop, AbortingAWeighingWritesNoMass) {
  MainWindow window(nullptr, options());
  ASSERT_NO_FATAL_FAILURE(connect_simulated(window));
  SeriesView& view = window.series();
  ASSERT_TRUE(view.paste_text(
      "river\tsample\tcalcium in drinking water\t2\t\tg from balance\t\t\t11, 12\n"));
  ASSERT_TRUE(view.read_masses());
  ASSERT_TRUE(wait_until([&] { return !view.instruction().isEmpty(); }));
  EXPECT_TRUE(view.instruction().startsWith("Put the empty vessel"))
      << view.instruction().toStdString();
  view.abort();
  ASSERT_TRUE(wait_until([&] { return !view.running(); }));
  EXPECT_TRUE(view.message().contains("weighing cancelled")) << view.message().toStdString();
  EXPECT_EQ(view.rows()[0].cell(QueueColumn::size), "");
  EXPECT_FALSE(window.worker().busy());
}

TEST_F(Desktop, LayoutAndConnectionsAreRememberedAndViewsFollowTheKeyboard) {
  {
    MainWindow window(nullptr, options());
    window.show();
    QApplication::setActiveWindow(&window);
    ASSERT_TRUE(QTest::qWaitForWindowActive(&window));
    EXPECT_EQ(window.view_count(), 7);
    // Ctrl+2: the second view, Series.
    QTest::keyClick(&window, Qt::Key_2, Qt::ControlModifier);
    EXPECT_EQ(window.view_title(window.current_view()), "Series");
    QTest::keyClick(&window, Qt::Key_4, Qt::ControlModifier);
    EXPECT_EQ(window.view_title(window.current_view()), "Stored runs");
    QTest::keyClick(&window, Qt::Key_5, Qt::ControlModifier);
    EXPECT_EQ(window.view_title(window.current_view()), "Methods");
    // A view added later is one line, and gets its key.
    auto* extra = new QWidget();
    EXPECT_EQ(window.add_view("Extra", extra), 7);
    QTest::keyClick(&window, Qt::Key_8, Qt::ControlModifier);
    EXPECT_EQ(window.current_view(), 7);
    window.show_view(1);
    window.resize(1111, 777);
    window.instruments().use_simulated();
    EXPECT_TRUE(window.close());
  }
  MainWindow again(nullptr, options());
  EXPECT_EQ(again.current_view(), 1);
  EXPECT_EQ(again.size(), QSize(1111, 777));
  EXPECT_EQ(again.instruments().settings()[BenchRole::stirrer].connection, "simulated");
  // The settings went to the test's own file, not the user's.
  EXPECT_TRUE(fs::exists(dir_ / "settings.ini"));
}

/// Screenshots of the three views filled with demo data, for docs/desktop.md.
TEST_F(Desktop, ScreenshotsOfTheViewsWithDemoData) {
  MainWindow window(nullptr, options());
  window.setAttribute(Qt::WA_DontShowOnScreen);
  window.resize(1200, 780);
  window.show();
  ASSERT_TRUE(window.create_database(db()).has_value());
  ASSERT_NO_FATAL_FAILURE(connect_simulated(window));
  window.series().load_demo_series();
  ASSERT_TRUE(window.series().start());
  ASSERT_TRUE(wait_until([&] { return !window.series().running(); }));
  // The electrode in the last vessel, read live after the series.
  window.instruments().set_live_readings(true);
  ASSERT_TRUE(wait_until([&] { return !window.instruments().reading_text().startsWith("- mV"); }));
  window.instruments().set_live_readings(false);
  ASSERT_TRUE(wait_until(
      [&] { return window.live_run().drawn_point_count() == window.live_run().point_count(); }));

  const fs::path out = fs::path(VEQ_SOURCE_DIR) / "docs" / "screenshots";
  fs::create_directories(out);
  const std::pair<int, const char*> shots[] = {
      {0, "desktop-instruments.png"}, {1, "desktop-series.png"}, {2, "desktop-live-run.png"}};
  for (const auto& [view, file] : shots) {
    window.show_view(view);
    QApplication::processEvents();
    // 256 colours keep each file small; the text stays sharp.
    const QImage image =
        window.grab().toImage().convertToFormat(QImage::Format_Indexed8, Qt::ThresholdDither);
    const std::string path = (out / file).string();
    ASSERT_TRUE(image.save(QString::fromStdString(path), "PNG")) << path;
    const QImage back(QString::fromStdString(path));
    EXPECT_EQ(back.width(), 1200) << path;
    EXPECT_LT(fs::file_size(path), 400u * 1024u) << path;
  }
}

}  // namespace
}  // namespace veq::ui
